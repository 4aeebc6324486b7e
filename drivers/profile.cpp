#include "drivers/profile.hpp"

#include <algorithm>
#include <charconv>
#include <cmath>
#include <fstream>
#include <set>
#include <sstream>

#include "common/hex.hpp"
#include "drivers/line_framing.hpp"

namespace veq::drivers::profile {

namespace {

bool is_name_char(char c) {
  return (c >= 'a' && c <= 'z') || (c >= '0' && c <= '9') || c == '_';
}

bool is_name(std::string_view s) {
  return !s.empty() && std::all_of(s.begin(), s.end(), is_name_char);
}

/// A number in veq's units, as a field value: fixed notation, no exponent,
/// trailing zeros dropped ("0.05", "12", "-3.5").
std::string format_native(double value) {
  std::string s = protocol::format_number(value, 9);
  if (s.find('.') != std::string::npos) {
    while (!s.empty() && s.back() == '0')
      s.pop_back();
    if (!s.empty() && s.back() == '.')
      s.pop_back();
  }
  if (s == "-0")
    s = "0";
  return s;
}

std::optional<double> parse_double(std::string_view s) {
  while (!s.empty() && s.front() == ' ')
    s.remove_prefix(1);
  if (!s.empty() && s.front() == '+')
    s.remove_prefix(1);
  double out = 0.0;
  const auto [ptr, ec] = std::from_chars(s.data(), s.data() + s.size(), out);
  if (s.empty() || ec != std::errc() || ptr != s.data() + s.size() || !std::isfinite(out))
    return std::nullopt;
  return out;
}

// ---- lines of a profile file ----

struct Token {
  std::string text;
  bool quoted = false;
};

/// Splits a line into tokens: words, or quoted text with \" \\ \r \n \t \xNN
/// escapes; '#' at the start of a token begins a comment.
Result<std::vector<Token>> tokenize(std::string_view line) {
  std::vector<Token> out;
  std::size_t i = 0;
  while (i < line.size()) {
    const char c = line[i];
    if (c == ' ' || c == '\t' || c == '\r') {
      ++i;
      continue;
    }
    if (c == '#')
      break;
    Token t;
    if (c == '"') {
      t.quoted = true;
      ++i;
      bool closed = false;
      while (i < line.size()) {
        const char d = line[i];
        if (d == '"') {
          closed = true;
          ++i;
          break;
        }
        if (d == '\\') {
          if (i + 1 >= line.size())
            return make_error(ErrorKind::invalid_input, "a lone '\\' at the end of a quote");
          const char e = line[i + 1];
          if (e == '"' || e == '\\') {
            t.text += e;
            i += 2;
          } else if (e == 'r') {
            t.text += '\r';
            i += 2;
          } else if (e == 'n') {
            t.text += '\n';
            i += 2;
          } else if (e == 't') {
            t.text += '\t';
            i += 2;
          } else if (e == 'x' && i + 3 < line.size() && hex_digit(line[i + 2]) >= 0 &&
                     hex_digit(line[i + 3]) >= 0) {
            t.text += static_cast<char>(hex_digit(line[i + 2]) * 16 + hex_digit(line[i + 3]));
            i += 4;
          } else {
            return make_error(ErrorKind::invalid_input,
                              "unknown escape '\\" + std::string(1, e) +
                                  "' in a quote (known: \\\" \\\\ \\r \\n \\t \\xNN)");
          }
          continue;
        }
        t.text += d;
        ++i;
      }
      if (!closed)
        return make_error(ErrorKind::invalid_input, "a quote is not closed");
      if (i < line.size() && line[i] != ' ' && line[i] != '\t' && line[i] != '\r') {
        return make_error(ErrorKind::invalid_input, "text right after a closing quote");
      }
    } else {
      while (i < line.size() && line[i] != ' ' && line[i] != '\t' && line[i] != '\r') {
        if (line[i] == '"')
          return make_error(ErrorKind::invalid_input, "a quote inside a word");
        t.text += line[i];
        ++i;
      }
    }
    out.push_back(std::move(t));
  }
  return out;
}

/// Compiles "D{volume_ml:int6} R{rate_ml_per_min:int}" into pieces.
Result<Template> compile_template(std::string_view source, int line) {
  Template t;
  t.source = std::string(source);
  t.line = line;
  auto fail = [&](const std::string& why) {
    return make_error(ErrorKind::invalid_input,
                      "template \"" + escape_bytes(source) + "\": " + why);
  };
  auto add_literal = [&](char c) {
    if (!t.pieces.empty() && t.pieces.back().kind == Piece::Kind::literal) {
      t.pieces.back().text += c;
    } else {
      Piece p;
      p.kind = Piece::Kind::literal;
      p.text = std::string(1, c);
      t.pieces.push_back(std::move(p));
    }
  };
  std::size_t i = 0;
  while (i < source.size()) {
    const char c = source[i];
    if (c == '{' && i + 1 < source.size() && source[i + 1] == '{') {
      add_literal('{');
      i += 2;
    } else if (c == '}' && i + 1 < source.size() && source[i + 1] == '}') {
      add_literal('}');
      i += 2;
    } else if (c == '}') {
      return fail("a '}' without its '{' (write '}}' for the character)");
    } else if (c == '{') {
      const auto close = source.find('}', i);
      if (close == std::string_view::npos)
        return fail("a '{' is not closed");
      const std::string_view inside = source.substr(i + 1, close - i - 1);
      const auto colon = inside.find(':');
      Piece p;
      p.kind = Piece::Kind::field;
      p.field = std::string(inside.substr(0, colon));
      if (!is_name(p.field)) {
        return fail("'{" + std::string(inside) +
                    "}' does not name a field (lower-case letters, digits and _)");
      }
      const std::string type =
          colon == std::string_view::npos ? "word" : std::string(inside.substr(colon + 1));
      auto digits_after = [&](std::size_t prefix, int low, int high) -> std::optional<int> {
        const std::string rest = type.substr(prefix);
        if (rest.empty())
          return 0;
        int n = 0;
        const auto [ptr, ec] = std::from_chars(rest.data(), rest.data() + rest.size(), n);
        if (ec != std::errc() || ptr != rest.data() + rest.size() || n < low || n > high)
          return std::nullopt;
        return n;
      };
      if (type == "word") {
        p.type = ValueType::word;
      } else if (type == "text") {
        p.type = ValueType::text;
      } else if (type.rfind("int", 0) == 0) {
        p.type = ValueType::integer;
        auto n = digits_after(3, 1, 12);
        if (!n)
          return fail("'" + type + "': int takes a width of 1 to 12 digits (int6)");
        p.digits = *n;
      } else if (type.rfind("fix", 0) == 0 && type.size() > 3) {
        p.type = ValueType::fixed;
        auto n = digits_after(3, 0, 9);
        if (!n)
          return fail("'" + type + "': fix takes 0 to 9 decimals (fix2)");
        p.digits = *n;
      } else {
        return fail("unknown type '" + type + "' (known: int, intN, fixN, word, text)");
      }
      if (!t.pieces.empty() && t.pieces.back().kind == Piece::Kind::field) {
        return fail("fields '" + t.pieces.back().field + "' and '" + p.field +
                    "' touch; put literal text between them so that a reply can be split");
      }
      t.pieces.push_back(std::move(p));
      i = close + 1;
    } else if (c == ' ') {
      Piece p;
      p.kind = Piece::Kind::spaces;
      while (i < source.size() && source[i] == ' ') {
        p.text += ' ';
        ++i;
      }
      t.pieces.push_back(std::move(p));
    } else {
      add_literal(c);
      ++i;
    }
  }
  if (t.pieces.empty())
    return fail("empty");
  std::set<std::string> seen;
  for (std::size_t k = 0; k < t.pieces.size(); ++k) {
    const Piece& p = t.pieces[k];
    if (p.kind != Piece::Kind::field)
      continue;
    if (!seen.insert(p.field).second)
      return fail("field '" + p.field + "' appears twice");
    if (p.type == ValueType::text && k + 1 != t.pieces.size())
      return fail("a text field ('" + p.field + "') takes the rest of the line: put it last");
    if ((p.type == ValueType::integer || p.type == ValueType::fixed) && k + 1 < t.pieces.size() &&
        t.pieces[k + 1].kind == Piece::Kind::literal) {
      const char next = t.pieces[k + 1].text.front();
      if ((next >= '0' && next <= '9') || (p.type == ValueType::fixed && next == '.')) {
        return fail("the number '" + p.field + "' is followed by '" + std::string(1, next) +
                    "', which could belong to it");
      }
    }
  }
  return t;
}

// ---- matching and filling ----

struct Capture {
  const Piece* piece;
  std::string raw;
};

/// Length of a number at the front of s (leading spaces allowed), or 0.
std::size_t number_length(std::string_view s, bool decimals) {
  std::size_t i = 0;
  while (i < s.size() && s[i] == ' ')
    ++i;
  if (i < s.size() && (s[i] == '+' || s[i] == '-'))
    ++i;
  const std::size_t digits_start = i;
  while (i < s.size() && s[i] >= '0' && s[i] <= '9')
    ++i;
  std::size_t integer_digits = i - digits_start;
  std::size_t fraction_digits = 0;
  if (decimals && i < s.size() && s[i] == '.') {
    std::size_t j = i + 1;
    while (j < s.size() && s[j] >= '0' && s[j] <= '9')
      ++j;
    fraction_digits = j - i - 1;
    if (integer_digits > 0 || fraction_digits > 0)
      i = j;
  }
  if (integer_digits == 0 && fraction_digits == 0)
    return 0;
  return i;
}

bool match_from(const std::vector<Piece>& pieces, std::size_t k, std::string_view line,
                std::size_t pos, std::vector<Capture>& captures) {
  if (k == pieces.size()) {
    // Trailing padding after the last piece is allowed.
    while (pos < line.size() && (line[pos] == ' ' || line[pos] == '\t'))
      ++pos;
    return pos == line.size();
  }
  const Piece& p = pieces[k];
  const std::string_view rest = line.substr(pos);
  switch (p.kind) {
    case Piece::Kind::literal:
      if (rest.substr(0, p.text.size()) != p.text)
        return false;
      return match_from(pieces, k + 1, line, pos + p.text.size(), captures);
    case Piece::Kind::spaces: {
      std::size_t n = 0;
      while (n < rest.size() && rest[n] == ' ')
        ++n;
      if (n == 0)
        return false;
      return match_from(pieces, k + 1, line, pos + n, captures);
    }
    case Piece::Kind::field:
      break;
  }
  if (p.type == ValueType::text) {
    captures.push_back({&p, std::string(rest)});
    return true;
  }
  if (p.type == ValueType::integer || p.type == ValueType::fixed) {
    const std::size_t n = number_length(rest, p.type == ValueType::fixed);
    if (n == 0)
      return false;
    captures.push_back({&p, std::string(rest.substr(0, n))});
    if (match_from(pieces, k + 1, line, pos + n, captures))
      return true;
    captures.pop_back();
    return false;
  }
  // A word: the longest run of non-space characters that lets the rest match.
  std::size_t longest = 0;
  while (longest < rest.size() && rest[longest] != ' ' && rest[longest] != '\t')
    ++longest;
  for (std::size_t n = longest; n >= 1; --n) {
    captures.push_back({&p, std::string(rest.substr(0, n))});
    if (match_from(pieces, k + 1, line, pos + n, captures))
      return true;
    captures.pop_back();
  }
  return false;
}

const std::vector<std::pair<std::string, std::string>>* map_of(const Profile& profile,
                                                               std::string_view field) {
  const auto it = profile.maps.find(field);
  return it == profile.maps.end() ? nullptr : &it->second;
}

Scale scale_of(const Profile& profile, std::string_view field) {
  const auto it = profile.scales.find(field);
  return it == profile.scales.end() ? Scale{} : it->second;
}

std::string known_words(const std::vector<std::pair<std::string, std::string>>& map, bool wire) {
  std::string out;
  for (const auto& [w, n] : map) {
    if (!out.empty())
      out += ", ";
    out += wire ? w : n;
  }
  return out;
}

/// Fields of a reply (word "ok"), with the operation's fixed fields.
protocol::Message ok_message(const Operation& op, std::vector<protocol::Field> fields) {
  protocol::Message m;
  m.word = "ok";
  m.fields = std::move(fields);
  for (const auto& f : op.fixed) {
    if (!m.find(f.name))
      m.fields.push_back(f);
  }
  return m;
}

}  // namespace

std::vector<std::string> Template::fields() const {
  std::vector<std::string> out;
  for (const auto& p : pieces) {
    if (p.kind == Piece::Kind::field)
      out.push_back(p.field);
  }
  return out;
}

const Operation* Profile::find(std::string_view word) const {
  for (const auto& op : operations) {
    if (op.word == word)
      return &op;
  }
  return nullptr;
}

std::vector<std::string> Profile::features() const {
  std::vector<std::string> out;
  for (const auto& spec : role_spec(role).operations) {
    if (!spec.required && find(spec.word))
      out.emplace_back(spec.word);
  }
  return out;
}

Result<std::optional<std::vector<protocol::Field>>> match_template(const Profile& profile,
                                                                   const Template& t,
                                                                   std::string_view line) {
  std::vector<Capture> captures;
  if (!match_from(t.pieces, 0, line, 0, captures))
    return std::optional<std::vector<protocol::Field>>();
  std::vector<protocol::Field> fields;
  for (const auto& c : captures) {
    const Piece& p = *c.piece;
    if (const auto* map = map_of(profile, p.field)) {
      std::string raw = c.raw;
      while (!raw.empty() && raw.front() == ' ')
        raw.erase(0, 1);
      const auto hit = std::find_if(map->begin(), map->end(),
                                    [&](const auto& pair) { return pair.first == raw; });
      if (hit == map->end()) {
        return make_error(ErrorKind::garbled, "'" + escape_bytes(raw) +
                                                  "' is not a known value of " + p.field +
                                                  " (known: " + known_words(*map, true) + ")");
      }
      fields.push_back({p.field, hit->second});
      continue;
    }
    if (p.type == ValueType::integer || p.type == ValueType::fixed) {
      const auto wire = parse_double(c.raw);
      if (!wire) {
        return make_error(ErrorKind::garbled,
                          "field " + p.field + " '" + escape_bytes(c.raw) + "' is not a number");
      }
      const Scale s = scale_of(profile, p.field);
      fields.push_back({p.field, format_native((*wire - s.offset) / s.factor)});
      continue;
    }
    fields.push_back({p.field, c.raw});
  }
  return std::optional<std::vector<protocol::Field>>(std::move(fields));
}

Result<std::string> fill_template(const Profile& profile, const Template& t,
                                  const protocol::Message& values) {
  std::string out;
  for (const auto& p : t.pieces) {
    if (p.kind != Piece::Kind::field) {
      out += p.text;
      continue;
    }
    const auto value = values.find(p.field);
    if (!value) {
      return make_error(ErrorKind::invalid_input, "'" + values.word + "' lacks field '" + p.field +
                                                      "' that \"" + escape_bytes(t.source) +
                                                      "\" needs");
    }
    if (const auto* map = map_of(profile, p.field)) {
      const auto hit = std::find_if(map->begin(), map->end(),
                                    [&](const auto& pair) { return pair.second == *value; });
      if (hit == map->end()) {
        return make_error(ErrorKind::invalid_input,
                          "no word of the instrument for " + p.field + " '" + std::string(*value) +
                              "' (mapped: " + known_words(*map, false) + ")");
      }
      out += hit->first;
      continue;
    }
    if (p.type == ValueType::integer || p.type == ValueType::fixed) {
      const auto native = parse_double(*value);
      if (!native) {
        return make_error(ErrorKind::invalid_input,
                          "field " + p.field + " '" + std::string(*value) + "' is not a number");
      }
      const Scale s = scale_of(profile, p.field);
      const double wire = *native * s.factor + s.offset;
      if (!std::isfinite(wire) || std::fabs(wire) > 1e15) {
        return make_error(ErrorKind::invalid_input,
                          "field " + p.field + " is out of range on the wire");
      }
      if (p.type == ValueType::fixed) {
        out += protocol::format_number(wire, p.digits);
        continue;
      }
      const long long whole = std::llround(wire);
      std::string digits = std::to_string(whole < 0 ? -whole : whole);
      if (static_cast<int>(digits.size()) < p.digits)
        digits.insert(0, static_cast<std::size_t>(p.digits) - digits.size(), '0');
      out += (whole < 0 ? "-" : "") + digits;
      continue;
    }
    if (p.type == ValueType::word &&
        (value->empty() || value->find(' ') != std::string_view::npos)) {
      return make_error(ErrorKind::invalid_input,
                        "field " + p.field + " '" + std::string(*value) + "' is not one word");
    }
    out += *value;
  }
  return out;
}

// ---- parsing a profile ----

namespace {

class ProfileReader {
 public:
  explicit ProfileReader(std::string source) { profile_.source = std::move(source); }

  Result<Profile> read(std::string_view text) {
    int number = 0;
    std::size_t start = 0;
    while (start <= text.size()) {
      const auto end = text.find('\n', start);
      const std::string_view line =
          text.substr(start, end == std::string_view::npos ? std::string_view::npos : end - start);
      ++number;
      if (auto r = directive(line, number); !r)
        return r.error();
      if (end == std::string_view::npos)
        break;
      start = end + 1;
    }
    last_line_ = number;
    if (auto r = check(); !r)
      return r.error();
    return std::move(profile_);
  }

 private:
  Error fail(int line, const std::string& why) const {
    return make_error(ErrorKind::invalid_input,
                      profile_.source + ": line " + std::to_string(line) + ": " + why);
  }

  Result<void> directive(std::string_view text, int line) {
    auto tokens = tokenize(text);
    if (!tokens)
      return fail(line, tokens.error().message);
    if (tokens->empty())
      return {};
    const auto& t = *tokens;
    const std::string& word = t[0].text;
    if (t[0].quoted)
      return fail(line, "a line starts with a directive word, not a quote");
    auto args = [&](std::size_t low, std::size_t high, const char* form) -> Result<void> {
      if (t.size() - 1 < low || t.size() - 1 > high)
        return fail(line, "expected: " + std::string(form));
      return {};
    };
    if (!version_line_) {
      if (word != "veq_profile") {
        return fail(line,
                    "a profile begins with 'veq_profile " + std::to_string(kFormatVersion) + "'");
      }
      if (auto r = args(1, 1, "veq_profile 1"); !r)
        return r;
      if (t[1].text != std::to_string(kFormatVersion)) {
        return fail(line, "format revision '" + t[1].text + "' is not one this veq reads (" +
                              std::to_string(kFormatVersion) + ")");
      }
      version_line_ = line;
      return {};
    }
    if (word == "veq_profile")
      return fail(line, "'veq_profile' given twice");
    if (word == "role") {
      if (auto r = args(1, 1, "role <name>"); !r)
        return r;
      if (role_line_)
        return fail(line, "'role' given twice (first on line " + std::to_string(role_line_) + ")");
      const auto role = role_from_name(t[1].text);
      if (!role) {
        std::string known;
        for (Role r : all_roles())
          known += (known.empty() ? "" : ", ") + std::string(role_name(r));
        return fail(line, "unknown role '" + t[1].text + "' (known: " + known + ")");
      }
      profile_.role = *role;
      role_line_ = line;
      return {};
    }
    if (!role_line_ && word != "model" && word != "command_end" && word != "reply_end")
      return fail(line, "'role' must come before '" + word + "'");
    if (word == "model") {
      if (auto r = args(1, 1, "model \"<name of the instrument>\""); !r)
        return r;
      profile_.model = t[1].text;
      model_line_ = line;
      return {};
    }
    if (word == "command_end" || word == "reply_end") {
      if (auto r = args(1, 1, "command_end crlf (lf, cr, crlf, lfcr, etx or \"\\r\\n\")"); !r)
        return r;
      std::string bytes;
      if (t[1].quoted) {
        bytes = t[1].text;
        if (bytes.empty() || bytes.size() > kMaxTerminatorBytes)
          return fail(line,
                      "a line end has 1 to " + std::to_string(kMaxTerminatorBytes) + " bytes");
      } else {
        auto parsed = parse_line_end(t[1].text);
        if (!parsed)
          return fail(line, parsed.error().message);
        bytes = *parsed;
      }
      (word == "command_end" ? profile_.command_end : profile_.reply_end) = bytes;
      (word == "command_end" ? command_end_line_ : reply_end_line_) = line;
      return {};
    }
    if (word == "reply_timeout_ms") {
      if (auto r = args(1, 1, "reply_timeout_ms <1..60000>"); !r)
        return r;
      const auto v = parse_double(t[1].text);
      if (!v || *v < 1 || *v > 60000 || std::floor(*v) != *v)
        return fail(line, "reply_timeout_ms '" + t[1].text + "' is not a whole number 1..60000");
      profile_.reply_timeout = std::chrono::milliseconds(static_cast<long long>(*v));
      return {};
    }
    if (word == "echo") {
      if (auto r = args(1, 1, "echo yes|no"); !r)
        return r;
      if (t[1].text != "yes" && t[1].text != "no")
        return fail(line, "echo '" + t[1].text + "' is not yes or no");
      profile_.echo = t[1].text == "yes";
      return {};
    }
    if (word == "fact") {
      if (auto r = args(2, 2, "fact <field> <value>"); !r)
        return r;
      const auto& spec = role_spec(profile_.role);
      const bool known =
          std::any_of(spec.identity.begin(), spec.identity.end(),
                      [&](const FieldSpec& f) { return f.name == t[1].text; }) ||
          std::find(std::begin(kCommonIdentityFields), std::end(kCommonIdentityFields),
                    t[1].text) != std::end(kCommonIdentityFields);
      if (!known || t[1].text == "role" || t[1].text == "protocol") {
        return fail(line, "'" + t[1].text + "' is not an identify field of a " +
                              std::string(role_name(profile_.role)) + " (" + identity_names() +
                              ")");
      }
      for (const auto& f : profile_.facts) {
        if (f.name == t[1].text)
          return fail(line, "fact '" + t[1].text + "' given twice");
      }
      profile_.facts.push_back({t[1].text, t[2].text});
      return {};
    }
    if (word == "scale") {
      if (t.size() != 3 && t.size() != 5)
        return fail(line, "expected: scale <field> <factor>[/<divisor>] [offset <number>]");
      if (!is_name(t[1].text))
        return fail(line, "'" + t[1].text + "' is not a field name");
      if (profile_.scales.count(t[1].text))
        return fail(line, "scale of '" + t[1].text + "' given twice");
      Scale s;
      const std::string& f = t[2].text;
      const auto slash = f.find('/');
      const auto top = parse_double(f.substr(0, slash));
      const auto bottom = slash == std::string::npos ? std::optional<double>(1.0)
                                                     : parse_double(f.substr(slash + 1));
      if (!top || !bottom || *top == 0.0 || *bottom == 0.0)
        return fail(line, "scale factor '" + f + "' is not a number other than 0 (or a/b)");
      s.factor = *top / *bottom;
      if (t.size() == 5) {
        if (t[3].text != "offset")
          return fail(line, "expected 'offset' after the factor, not '" + t[3].text + "'");
        const auto off = parse_double(t[4].text);
        if (!off)
          return fail(line, "offset '" + t[4].text + "' is not a number");
        s.offset = *off;
      }
      profile_.scales[t[1].text] = s;
      return {};
    }
    if (word == "map") {
      if (auto r = args(3, 3, "map <field> <instrument's word> <veq's word>"); !r)
        return r;
      if (!is_name(t[1].text))
        return fail(line, "'" + t[1].text + "' is not a field name");
      if (t[2].text.empty() || t[3].text.empty())
        return fail(line, "a mapped word may not be empty");
      auto& pairs = profile_.maps[t[1].text];
      for (const auto& [w, n] : pairs) {
        if (w == t[2].text)
          return fail(line, "'" + w + "' of " + t[1].text + " is mapped twice");
        if (n == t[3].text)
          return fail(line, "'" + n + "' of " + t[1].text + " has two words of the instrument");
      }
      pairs.emplace_back(t[2].text, t[3].text);
      return {};
    }
    if (word == "error" || word == "unsolicited") {
      if (auto r = args(1, 1, "error \"<pattern>\""); !r)
        return r;
      auto tpl = compile_template(t[1].text, line);
      if (!tpl)
        return fail(line, tpl.error().message);
      if (word == "error") {
        profile_.errors.push_back(std::move(*tpl));
      } else {
        if (profile_.unsolicited)
          return fail(line, "'unsolicited' given twice");
        if (role_spec(profile_.role).reading.empty()) {
          return fail(
              line, "a " + std::string(role_name(profile_.role)) + " sends no readings on its own");
        }
        profile_.unsolicited = std::move(*tpl);
      }
      return {};
    }
    if (word == "op") {
      if (auto r = args(1, 1, "op <operation>"); !r)
        return r;
      const OperationSpec* spec = find_operation(profile_.role, t[1].text);
      if (!spec) {
        return fail(line, "a " + std::string(role_name(profile_.role)) + " has no operation '" +
                              t[1].text + "' (" + operation_names() + ")");
      }
      if (const Operation* earlier = profile_.find(t[1].text)) {
        return fail(line, "op '" + t[1].text + "' given twice (first on line " +
                              std::to_string(earlier->line) + ")");
      }
      Operation op;
      op.word = t[1].text;
      op.line = line;
      profile_.operations.push_back(std::move(op));
      return {};
    }
    if (word == "send" || word == "reply" || word == "then" || word == "fixed") {
      if (profile_.operations.empty())
        return fail(line, "'" + word + "' belongs to an operation: write 'op <operation>' first");
      Operation& op = profile_.operations.back();
      if (word == "then") {
        if (auto r = args(1, 1, "then <operation>"); !r)
          return r;
        if (!op.then.empty())
          return fail(line, "'then' given twice for op '" + op.word + "'");
        op.then = t[1].text;
        op.then_line = line;
        return {};
      }
      if (word == "fixed") {
        if (auto r = args(2, 2, "fixed <field> <value>"); !r)
          return r;
        op.fixed.push_back({t[1].text, t[2].text});
        return {};
      }
      if (auto r = args(1, 1, "send \"<template>\""); !r)
        return r;
      auto tpl = compile_template(t[1].text, line);
      if (!tpl)
        return fail(line, tpl.error().message);
      auto& slot = word == "send" ? op.send : op.reply;
      if (slot)
        return fail(line, "'" + word + "' given twice for op '" + op.word + "'");
      slot = std::move(*tpl);
      return {};
    }
    return fail(line, "unknown directive '" + word +
                          "' (known: veq_profile, role, model, command_end, reply_end, "
                          "reply_timeout_ms, echo, fact, scale, map, error, unsolicited, op, "
                          "send, reply, then, fixed)");
  }

  std::string identity_names() const {
    std::string out;
    for (auto n : kCommonIdentityFields) {
      if (n != "role" && n != "protocol")
        out += (out.empty() ? "" : ", ") + std::string(n);
    }
    for (const auto& f : role_spec(profile_.role).identity)
      out += ", " + std::string(f.name);
    return out;
  }

  std::string operation_names() const {
    std::string out;
    for (const auto& o : role_spec(profile_.role).operations)
      out += (out.empty() ? "" : ", ") + std::string(o.word);
    return out;
  }

  static std::string names(const std::vector<FieldSpec>& fields) {
    std::string out;
    for (const auto& f : fields)
      out += (out.empty() ? "" : ", ") + std::string(f.name);
    return out.empty() ? "none" : out;
  }

  /// Fields an operation's reply may carry (identify: the role's identity).
  std::vector<FieldSpec> reply_fields(const OperationSpec& spec) const {
    if (spec.word != "identify")
      return spec.reply;
    std::vector<FieldSpec> out = role_spec(profile_.role).identity;
    for (auto n : kCommonIdentityFields) {
      if (n != "role" && n != "protocol")
        out.push_back({n, false});
    }
    return out;
  }

  Result<void> check() {
    const int end = last_line_;
    if (!version_line_)
      return fail(end, "empty profile: it begins with 'veq_profile 1'");
    if (!role_line_)
      return fail(end, "no 'role' line: every profile names the role of its instrument");
    if (!model_line_)
      return fail(end, "no 'model' line: name the instrument (model \"...\")");
    if (!command_end_line_)
      return fail(end, "no 'command_end' line: say which bytes end a command (cr, lf, crlf...)");
    if (!reply_end_line_)
      return fail(end, "no 'reply_end' line: say which bytes end a reply (cr, lf, crlf...)");
    const RoleSpec& role = role_spec(profile_.role);
    for (const auto& spec : role.operations) {
      if (spec.required && !profile_.find(spec.word)) {
        return fail(role_line_, "a " + std::string(role_name(profile_.role)) +
                                    " profile must map op '" + std::string(spec.word) + "'");
      }
    }
    for (const auto& op : profile_.operations) {
      const OperationSpec& spec = *find_operation(profile_.role, op.word);
      if (!op.send)
        return fail(op.line, "op '" + op.word + "' has no 'send' template");
      if (!op.reply)
        return fail(op.line, "op '" + op.word + "' has no 'reply' pattern");
      for (const auto& name : op.send->fields()) {
        const bool known = std::any_of(spec.request.begin(), spec.request.end(),
                                       [&](const FieldSpec& f) { return f.name == name; });
        if (!known) {
          return fail(op.send->line, "'" + op.word + "' sends no field '" + name +
                                         "' (its fields: " + names(spec.request) + ")");
        }
      }
      for (const auto& f : spec.request) {
        const auto sent = op.send->fields();
        if (f.required && std::find(sent.begin(), sent.end(), f.name) == sent.end()) {
          return fail(op.send->line,
                      "'" + op.word + "' must send field '" + std::string(f.name) + "'");
        }
      }
      const auto allowed = reply_fields(spec);
      std::set<std::string, std::less<>> given;
      auto take = [&](const std::string& name, int line) -> Result<void> {
        const bool known = std::any_of(allowed.begin(), allowed.end(),
                                       [&](const FieldSpec& f) { return f.name == name; });
        if (!known) {
          return fail(line, "the reply to '" + op.word + "' has no field '" + name +
                                "' (its fields: " + names(allowed) + ")");
        }
        given.insert(name);
        return {};
      };
      for (const auto& name : op.reply->fields()) {
        if (auto r = take(name, op.reply->line); !r)
          return r;
      }
      for (const auto& f : op.fixed) {
        if (auto r = take(f.name, op.line); !r)
          return r;
      }
      if (!op.then.empty()) {
        const Operation* next = profile_.find(op.then);
        if (!next) {
          return fail(op.then_line, "op '" + op.then + "' named by 'then' is not in the profile");
        }
        if (next == &op || !next->then.empty()) {
          return fail(op.then_line,
                      "'then' may name one further operation, which has no 'then' of its own");
        }
        if (next->reply) {
          for (const auto& name : next->reply->fields())
            given.insert(name);
        }
        for (const auto& f : next->fixed)
          given.insert(f.name);
      }
      if (op.word == "identify") {
        for (const auto& f : profile_.facts)
          given.insert(f.name);
      }
      for (const auto& f : allowed) {
        if (f.required && !given.count(f.name)) {
          return fail(op.reply->line, "the reply to '" + op.word + "' must give field '" +
                                          std::string(f.name) +
                                          "' (capture it, add 'fixed', or for identify a 'fact')");
        }
      }
    }
    for (const auto& e : profile_.errors) {
      for (const auto& name : e.fields()) {
        if (name != "reason" && name != "message") {
          return fail(e.line,
                      "an error pattern captures only 'reason' and 'message', not '" + name + "'");
        }
      }
    }
    if (profile_.unsolicited) {
      const auto& reading = role.reading;
      std::vector<FieldSpec> fields = reading;
      for (const auto& name : profile_.unsolicited->fields()) {
        const bool known = std::any_of(fields.begin(), fields.end(),
                                       [&](const FieldSpec& f) { return f.name == name; });
        if (!known) {
          return fail(profile_.unsolicited->line,
                      "a reading has no field '" + name + "' (its fields: " + names(fields) + ")");
        }
      }
      const auto captured = profile_.unsolicited->fields();
      for (const auto& f : reading) {
        if (f.required && std::find(captured.begin(), captured.end(), f.name) == captured.end()) {
          return fail(profile_.unsolicited->line,
                      "a reading must give field '" + std::string(f.name) + "'");
        }
      }
    }
    return {};
  }

  Profile profile_;
  int version_line_ = 0;
  int role_line_ = 0;
  int model_line_ = 0;
  int command_end_line_ = 0;
  int reply_end_line_ = 0;
  int last_line_ = 0;
};

}  // namespace

Result<Profile> parse_profile(std::string_view text, std::string_view source_name) {
  ProfileReader reader{std::string(source_name)};
  return reader.read(text);
}

Result<Profile> load_profile(const std::string& path) {
  std::ifstream in(path, std::ios::binary);
  if (!in)
    return make_error(ErrorKind::not_found, "cannot open device profile '" + path + "'");
  std::ostringstream text;
  text << in.rdbuf();
  return parse_profile(text.str(), path);
}

// ---- host side ----

Result<std::string> encode_command(const Profile& profile, const protocol::Message& request) {
  const Operation* op = profile.find(request.word);
  if (!op || !op->send) {
    return make_error(ErrorKind::invalid_input,
                      "profile '" + profile.model + "' maps no '" + request.word + "'");
  }
  auto text = fill_template(profile, *op->send, request);
  if (!text)
    return text.error();
  return *text + profile.command_end;
}

Result<protocol::Message> read_unsolicited(const Profile& profile, std::string_view line) {
  if (profile.unsolicited) {
    auto fields = match_template(profile, *profile.unsolicited, line);
    if (!fields)
      return fields.error();
    if (*fields) {
      protocol::Message m;
      m.word = "reading";
      m.fields = std::move(**fields);
      return m;
    }
  }
  return make_error(ErrorKind::garbled, "'" + escape_bytes(line.substr(0, 80)) +
                                            "' is not a reading of " + profile.model);
}

Result<protocol::Message> read_reply(const Profile& profile, const Operation& operation,
                                     std::string_view line) {
  if (operation.reply) {
    auto fields = match_template(profile, *operation.reply, line);
    if (!fields)
      return fields.error();
    if (*fields)
      return ok_message(operation, std::move(**fields));
  }
  for (const auto& e : profile.errors) {
    auto fields = match_template(profile, e, line);
    if (!fields)
      return fields.error();
    if (*fields) {
      protocol::Message m;
      m.word = "error";
      std::string reason = "refused";
      std::string message;
      for (const auto& f : **fields) {
        if (f.name == "reason")
          reason = f.value;
        else if (f.name == "message")
          message = f.value;
      }
      m.add("reason", reason);
      if (!message.empty())
        m.add("message", message);
      return m;
    }
  }
  if (profile.unsolicited) {
    auto reading = read_unsolicited(profile, line);
    if (reading)
      return reading;
  }
  return make_error(ErrorKind::garbled,
                    "reply '" + escape_bytes(line.substr(0, 80)) + "' does not match \"" +
                        escape_bytes(operation.reply ? operation.reply->source : std::string()) +
                        "\" nor an error pattern of the profile");
}

// ---- device side ----

Result<protocol::Message> parse_command(const Profile& profile, std::string_view line) {
  for (const auto& op : profile.operations) {
    if (!op.send)
      continue;
    auto fields = match_template(profile, *op.send, line);
    if (!fields)
      return fields.error();
    if (*fields) {
      protocol::Message m;
      m.word = op.word;
      m.fields = std::move(**fields);
      return m;
    }
  }
  return make_error(ErrorKind::garbled,
                    "'" + escape_bytes(line.substr(0, 80)) + "' is no command of " + profile.model);
}

Result<std::string> encode_reply(const Profile& profile, std::string_view word,
                                 const protocol::Message& reply) {
  if (reply.word == "error") {
    if (profile.errors.empty()) {
      return make_error(ErrorKind::invalid_input,
                        "profile '" + profile.model + "' has no error pattern");
    }
    protocol::Message values = reply;
    if (!values.find("message"))
      values.add("message", "refused");
    auto text = fill_template(profile, profile.errors.front(), values);
    if (!text)
      return text.error();
    return *text + profile.reply_end;
  }
  const Operation* op = profile.find(word);
  if (!op || !op->reply) {
    return make_error(ErrorKind::invalid_input,
                      "profile '" + profile.model + "' maps no '" + std::string(word) + "'");
  }
  auto text = fill_template(profile, *op->reply, reply);
  if (!text)
    return text.error();
  return *text + profile.reply_end;
}

Result<std::string> encode_unsolicited(const Profile& profile, const protocol::Message& reading) {
  if (!profile.unsolicited) {
    return make_error(ErrorKind::invalid_input,
                      "profile '" + profile.model + "' has no unsolicited pattern");
  }
  auto text = fill_template(profile, *profile.unsolicited, reading);
  if (!text)
    return text.error();
  return *text + profile.reply_end;
}

}  // namespace veq::drivers::profile
