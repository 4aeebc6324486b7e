// The text format shared by method and series files: [section] headers,
// "key = value" lines, '#' comments, quantities with their units. A reader
// per section marks the keys it reads, so that every key left over can be
// named as unknown with its line; the first error is kept and names the
// origin, the line and the field.
#pragma once

#include <algorithm>
#include <cctype>
#include <charconv>
#include <cmath>
#include <map>
#include <optional>
#include <string>
#include <string_view>
#include <utility>
#include <vector>

#include <nlohmann/json.hpp>

#include "common/result.hpp"

namespace veq::method::text {

using nlohmann::json;

inline std::string trim(std::string_view s) {
  std::size_t b = 0;
  std::size_t e = s.size();
  while (b < e && std::isspace(static_cast<unsigned char>(s[b])))
    ++b;
  while (e > b && std::isspace(static_cast<unsigned char>(s[e - 1])))
    --e;
  return std::string(s.substr(b, e - b));
}

inline std::string lower(std::string s) {
  for (char& c : s)
    c = static_cast<char>(std::tolower(static_cast<unsigned char>(c)));
  return s;
}

/// Lower case, runs of blanks folded to one space: "Largest  Volume" -> "largest volume".
inline std::string normal_key(std::string_view key) {
  std::string out;
  bool blank = false;
  for (char c : trim(key)) {
    if (std::isspace(static_cast<unsigned char>(c))) {
      blank = true;
      continue;
    }
    if (blank && !out.empty())
      out += ' ';
    blank = false;
    out += static_cast<char>(std::tolower(static_cast<unsigned char>(c)));
  }
  return out;
}

inline std::string join(const std::vector<std::string_view>& names) {
  std::string out;
  for (auto n : names) {
    if (!out.empty())
      out += ", ";
    out += n;
  }
  return out;
}

/// Shortest text that reads back as the same double.
inline std::string number(double v) {
  char buffer[64];
  auto [end, ec] = std::to_chars(buffer, buffer + sizeof buffer, v);
  return ec == std::errc() ? std::string(buffer, end) : std::string("nan");
}

/// One text line for a text field (a method file holds one value per line).
inline std::string one_line(const std::string& s) {
  std::string out = s;
  std::replace(out.begin(), out.end(), '\n', ' ');
  std::replace(out.begin(), out.end(), '\r', ' ');
  return trim(out);
}

struct Unit {
  std::string_view name;
  double factor;  ///< to the base unit of the quantity
};

// Base units: mL, s, rpm, g/mol, signal units per minute, none.
inline const std::vector<Unit> kVolume = {{"mL", 1.0}, {"uL", 1e-3}, {"µL", 1e-3}, {"L", 1000.0}};
inline const std::vector<Unit> kTime = {{"s", 1.0}, {"min", 60.0}, {"h", 3600.0}};
inline const std::vector<Unit> kSpeed = {{"rpm", 1.0}};
inline const std::vector<Unit> kMolarMass = {{"g/mol", 1.0}};
inline const std::vector<Unit> kDrift = {{"mV/min", 1.0}, {"per min", 1.0}};
inline const std::vector<Unit> kNone = {{"", 1.0}};

inline std::string unit_list(const std::vector<Unit>& units) {
  std::string out;
  for (const auto& u : units) {
    if (!out.empty())
      out += ", ";
    out += u.name.empty() ? "no unit" : std::string(u.name);
  }
  return out;
}

struct Entry {
  std::string key;
  std::string value;
  int line = 0;
  bool used = false;
};

struct Section {
  std::string name;
  int line = 0;
  std::vector<Entry> entries;
};

/// Keeps the first error; later reads return defaults and add nothing.
class Errors {
 public:
  explicit Errors(std::string origin) : origin_(std::move(origin)) {}
  void add(int line, const std::string& field, const std::string& message) {
    if (error_)
      return;
    error_ = make_error(ErrorKind::invalid_input, origin_ + ": line " + std::to_string(line) +
                                                      ", field '" + field + "': " + message);
  }
  bool failed() const { return error_.has_value(); }
  const Error& error() const { return *error_; }

 private:
  std::string origin_;
  std::optional<Error> error_;
};

/// Reads the keys of one section; each read marks its key used.
class Reader {
 public:
  Reader(Section& section, Errors& errors, std::string what)
      : section_(section), errors_(errors), what_(std::move(what)) {}

  Entry* find(const std::string& key) {
    for (auto& e : section_.entries) {
      if (e.key == key) {
        e.used = true;
        return &e;
      }
    }
    return nullptr;
  }

  int line_of(const std::string& key) const {
    for (const auto& e : section_.entries)
      if (e.key == key)
        return e.line;
    return section_.line;
  }

  void missing(const std::string& key) {
    errors_.add(section_.line, key,
                "missing in the " + what_ + " starting at line " + std::to_string(section_.line));
  }

  std::string text(const std::string& key, std::optional<std::string> fallback = std::nullopt) {
    Entry* e = find(key);
    if (!e) {
      if (!fallback)
        missing(key);
      return fallback.value_or("");
    }
    if (e->value.empty() && !(fallback && fallback->empty()))
      errors_.add(e->line, key, "has no value");
    return e->value;
  }

  /// A value out of a fixed list of names.
  std::string choice(const std::string& key, const std::vector<std::string_view>& names,
                     std::optional<std::string> fallback = std::nullopt) {
    Entry* e = find(key);
    if (!e) {
      if (!fallback)
        missing(key);
      return fallback.value_or("");
    }
    const std::string wanted = normal_key(e->value);
    for (auto n : names)
      if (normal_key(n) == wanted)
        return std::string(n);
    errors_.add(e->line, key, "unknown value '" + e->value + "' (known: " + join(names) + ")");
    return fallback.value_or("");
  }

  bool yes_no(const std::string& key, bool fallback) {
    Entry* e = find(key);
    if (!e)
      return fallback;
    const std::string v = lower(e->value);
    if (v == "yes")
      return true;
    if (v == "no")
      return false;
    errors_.add(e->line, key, "must be yes or no, not '" + e->value + "'");
    return fallback;
  }

  int integer(const std::string& key, int lowest, int highest, std::optional<int> fallback) {
    Entry* e = find(key);
    if (!e) {
      if (!fallback)
        missing(key);
      return fallback.value_or(lowest);
    }
    int v = 0;
    const char* first = e->value.data();
    const char* last = first + e->value.size();
    auto [ptr, ec] = std::from_chars(first, last, v);
    if (ec != std::errc() || ptr != last) {
      errors_.add(e->line, key, "'" + e->value + "' is not a whole number");
      return fallback.value_or(lowest);
    }
    if (v < lowest || v > highest) {
      errors_.add(e->line, key,
                  std::to_string(v) + " is out of range (" + std::to_string(lowest) + " to " +
                      std::to_string(highest) + ")");
    }
    return v;
  }

  /// A number and its unit, converted to the base unit; checked against
  /// [lowest, highest] in the base unit (`open_low`: lowest itself excluded).
  double quantity(const std::string& key, const std::vector<Unit>& units, double lowest,
                  double highest, std::optional<double> fallback, bool open_low = false) {
    Entry* e = find(key);
    if (!e) {
      if (!fallback)
        missing(key);
      return fallback.value_or(0.0);
    }
    auto v = parse_quantity(e->value, e->line, key, units);
    if (!v)
      return fallback.value_or(0.0);
    check_range(*v, e->line, key, lowest, highest, open_low, units);
    return *v;
  }

  std::optional<double> parse_quantity(const std::string& value, int line, const std::string& key,
                                       const std::vector<Unit>& units) {
    const std::string v = trim(value);
    double x = 0.0;
    const char* first = v.data();
    const char* last = first + v.size();
    auto [ptr, ec] = std::from_chars(first, last, x, std::chars_format::general);
    if (ec != std::errc() || ptr == first) {
      errors_.add(line, key, "'" + value + "' does not start with a number");
      return std::nullopt;
    }
    if (!std::isfinite(x)) {
      errors_.add(line, key, "'" + value + "' is not a finite number");
      return std::nullopt;
    }
    const std::string unit =
        lower(normal_key(std::string_view(ptr, static_cast<std::size_t>(last - ptr))));
    for (const auto& u : units)
      if (lower(std::string(u.name)) == unit)
        return x * u.factor;
    errors_.add(line, key,
                unit.empty()
                    ? "'" + value + "' needs a unit (" + unit_list(units) + ")"
                    : "wrong unit '" +
                          trim(std::string_view(ptr, static_cast<std::size_t>(last - ptr))) +
                          "' (expected " + unit_list(units) + ")");
    return std::nullopt;
  }

  void check_range(double v, int line, const std::string& key, double lowest, double highest,
                   bool open_low, const std::vector<Unit>& units) {
    if (v < lowest || v > highest || (open_low && v == lowest)) {
      const std::string base =
          units.front().name.empty() ? "" : " " + std::string(units.front().name);
      errors_.add(line, key,
                  number(v) + base + " is out of range (" + (open_low ? "above " : "") +
                      number(lowest) + " to " + number(highest) + base + ")");
    }
  }

  json json_object(const std::string& key) {
    Entry* e = find(key);
    if (!e)
      return json::object();
    json j = json::parse(e->value, nullptr, false);
    if (j.is_discarded() || !j.is_object()) {
      errors_.add(e->line, key,
                  "must be a JSON object on one line, such as {\"smallest_step_ml\": 0.01}");
      return json::object();
    }
    return j;
  }

  /// Every key not read is unknown here.
  void finish(const std::vector<std::string_view>& known) {
    for (const auto& e : section_.entries) {
      if (!e.used)
        errors_.add(e.line, e.key, "unknown key in the " + what_ + " (known: " + join(known) + ")");
    }
  }

  Errors& errors() { return errors_; }

 private:
  Section& section_;
  Errors& errors_;
  std::string what_;
};

/// Splits a file into its sections. Blank lines and lines starting with '#'
/// are skipped; a header must name one of `known`; a key may appear once per
/// section. Stops at the first error (kept in `errors`). `last_line` is set
/// to the number of the file's last line.
std::vector<Section> split_sections(std::string_view text,
                                    const std::vector<std::string_view>& known, Errors& errors,
                                    int* last_line = nullptr);

}  // namespace veq::method::text
