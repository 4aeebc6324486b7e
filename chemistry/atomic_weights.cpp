#include "chemistry/atomic_weights.hpp"

#include <cctype>
#include <string>

namespace veq::chemistry {

const std::vector<AtomicWeight>& atomic_weights() {
  // IUPAC standard atomic weights 2021, recalled from memory (see
  // kAtomicWeightsSource).
  static const std::vector<AtomicWeight> table{
      {"H", 1.008},     {"Li", 6.94},       {"B", 10.81},        {"C", 12.011},
      {"N", 14.007},    {"O", 15.999},      {"F", 18.998403162}, {"Na", 22.98976928},
      {"Mg", 24.305},   {"Al", 26.9815384}, {"Si", 28.085},      {"P", 30.973761998},
      {"S", 32.06},     {"Cl", 35.45},      {"K", 39.0983},      {"Ca", 40.078},
      {"Cr", 51.9961},  {"Mn", 54.938043},  {"Fe", 55.845},      {"Co", 58.933194},
      {"Ni", 58.6934},  {"Cu", 63.546},     {"Zn", 65.38},       {"Br", 79.904},
      {"Sr", 87.62},    {"Ag", 107.8682},   {"Cd", 112.414},     {"Sn", 118.71},
      {"I", 126.90447}, {"Ba", 137.327},    {"La", 138.90547},   {"Hg", 200.592},
      {"Pb", 207.2},    {"Bi", 208.9804},   {"Th", 232.0377},
  };
  return table;
}

veq::Result<double> atomic_weight_g_per_mol(std::string_view symbol) {
  for (const AtomicWeight& w : atomic_weights()) {
    if (w.symbol == symbol)
      return w.g_per_mol;
  }
  return veq::make_error(veq::ErrorKind::invalid_input,
                         "unknown element '" + std::string(symbol) + "'");
}

namespace {

// Recursive descent over: formula = part { ('.' | '·') count? part };
// part = { group count? }; group = Element | '(' part ')'.
class FormulaParser {
 public:
  explicit FormulaParser(std::string_view text) : text_(text) {}

  veq::Result<double> parse() {
    double total = 0.0;
    bool first = true;
    while (true) {
      double multiplier = 1.0;
      if (!first) {
        auto count = read_count();
        if (!count)
          return count.error();
        multiplier = *count;
      }
      auto part = parse_part(0);
      if (!part)
        return part.error();
      if (*part == 0.0)
        return fail("expected an element");
      total += multiplier * *part;
      first = false;
      if (pos_ == text_.size())
        break;
      if (text_[pos_] == '.') {
        ++pos_;
      } else if (text_.substr(pos_, 2) == "\xC2\xB7") {  // U+00B7 middle dot
        pos_ += 2;
      } else {
        return fail(text_[pos_] == ')' ? "a ')' without its '('" : "unexpected character");
      }
    }
    return total;
  }

 private:
  veq::Error fail(const std::string& what) const {
    return veq::make_error(
        veq::ErrorKind::invalid_input,
        "formula '" + std::string(text_) + "', position " + std::to_string(pos_ + 1) + ": " + what);
  }

  // A count, 1 when absent; an error for 0.
  veq::Result<double> read_count() {
    if (pos_ >= text_.size() || !std::isdigit(static_cast<unsigned char>(text_[pos_])))
      return 1.0;
    const std::size_t start = pos_;
    double value = 0.0;
    while (pos_ < text_.size() && std::isdigit(static_cast<unsigned char>(text_[pos_]))) {
      value = 10.0 * value + (text_[pos_] - '0');
      ++pos_;
      if (pos_ - start > 6)
        return fail("count too long");
    }
    if (value == 0.0) {
      pos_ = start;
      return fail("a count of 0");
    }
    return value;
  }

  veq::Result<double> parse_part(int depth) {
    if (depth > 8)
      return fail("parentheses nested too deeply");
    double total = 0.0;
    while (pos_ < text_.size()) {
      const char c = text_[pos_];
      double group = 0.0;
      if (c == '(') {
        const std::size_t open = pos_;
        ++pos_;
        auto inner = parse_part(depth + 1);
        if (!inner)
          return inner.error();
        if (pos_ >= text_.size() || text_[pos_] != ')') {
          pos_ = open;
          return fail("a '(' without its ')'");
        }
        if (*inner == 0.0)
          return fail("empty parentheses");
        ++pos_;
        group = *inner;
      } else if (std::isupper(static_cast<unsigned char>(c))) {
        const std::size_t start = pos_;
        ++pos_;
        while (pos_ < text_.size() && std::islower(static_cast<unsigned char>(text_[pos_])))
          ++pos_;
        auto weight = atomic_weight_g_per_mol(text_.substr(start, pos_ - start));
        if (!weight) {
          pos_ = start;
          return fail(weight.error().message);
        }
        group = *weight;
      } else {
        break;  // ')' , '.', '·' or an error for the caller
      }
      auto count = read_count();
      if (!count)
        return count.error();
      total += group * *count;
    }
    return total;
  }

  std::string_view text_;
  std::size_t pos_ = 0;
};

}  // namespace

veq::Result<double> molar_mass_g_per_mol(std::string_view formula) {
  if (formula.empty())
    return veq::make_error(veq::ErrorKind::invalid_input, "empty formula");
  return FormulaParser(formula).parse();
}

}  // namespace veq::chemistry
