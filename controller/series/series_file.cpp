#include "controller/series/series_file.hpp"

#include <fstream>
#include <set>
#include <sstream>

#include "controller/method/method.hpp"
#include "controller/method/section_text.hpp"

namespace veq::series {

namespace {

using namespace method::text;

const std::vector<Unit> kMass = {{"g", 1.0}, {"mg", 1e-3}};
const std::vector<Unit> kConc = {{"mol/L", 1.0}, {"mmol/L", 1e-3}};
const std::vector<Unit> kPercent = {{"%", 1.0}};
const std::vector<Unit> kDensity = {{"g/mL", 1.0}, {"kg/L", 1.0}};
const std::vector<Unit> kCelsius = {{"°C", 1.0}, {"C", 1.0}};
const std::vector<Unit> kMvPerMin = {{"mV/min", 1.0}};

std::vector<std::string> split_commas(const std::string& value) {
  std::vector<std::string> out;
  std::size_t pos = 0;
  while (true) {
    const std::size_t comma = value.find(',', pos);
    out.push_back(
        trim(value.substr(pos, comma == std::string::npos ? std::string::npos : comma - pos)));
    if (comma == std::string::npos)
      break;
    pos = comma + 1;
  }
  return out;
}

/// "1.2, 1.3, 1.25 g": numbers separated by commas; the unit may be given on
/// each or on the last only.
std::vector<double> quantity_list(Reader& r, const std::string& key, const std::vector<Unit>& units,
                                  double lowest, double highest, bool open_low) {
  std::vector<double> out;
  auto* e = r.find(key);
  if (!e)
    return out;
  auto parts = split_commas(e->value);
  // The unit of the last item serves the items written without one.
  std::string last_unit;
  {
    const std::string& last = parts.back();
    std::size_t i = 0;
    while (i < last.size() &&
           (std::isdigit(static_cast<unsigned char>(last[i])) || last[i] == '.' || last[i] == '-' ||
            last[i] == '+' || last[i] == 'e' || last[i] == 'E'))
      ++i;
    last_unit = trim(last.substr(i));
  }
  for (std::size_t k = 0; k < parts.size(); ++k) {
    std::string item = parts[k];
    if (item.empty()) {
      r.errors().add(e->line, key, "item " + std::to_string(k + 1) + " of the list is empty");
      return {};
    }
    const bool bare = item.find_first_not_of("0123456789.eE+-") == std::string::npos;
    if (bare && !last_unit.empty())
      item += " " + last_unit;
    auto v = r.parse_quantity(item, e->line, key, units);
    if (!v)
      return {};
    r.check_range(*v, e->line, key, lowest, highest, open_low, units);
    out.push_back(*v);
  }
  return out;
}

std::vector<int> position_list(Reader& r, const std::string& key, bool required) {
  std::vector<int> out;
  auto* e = r.find(key);
  if (!e) {
    if (required)
      r.missing(key);
    return out;
  }
  for (const auto& part : split_commas(e->value)) {
    int v = 0;
    auto [ptr, ec] = std::from_chars(part.data(), part.data() + part.size(), v);
    if (part.empty() || ec != std::errc() || ptr != part.data() + part.size() || v < 1 || v > 999) {
      r.errors().add(e->line, key,
                     "'" + part + "' is not a sample-changer position (a whole number 1 to 999)");
      return {};
    }
    out.push_back(v);
  }
  return out;
}

std::string list_text(const std::vector<double>& values, const std::string& unit) {
  std::string out;
  for (std::size_t i = 0; i < values.size(); ++i)
    out += (i ? ", " : "") + number(values[i]);
  return out + " " + unit;
}

std::string positions_text(const std::vector<int>& positions) {
  std::string out;
  for (std::size_t i = 0; i < positions.size(); ++i)
    out += (i ? ", " : "") + std::to_string(positions[i]);
  return out;
}

const std::vector<std::string_view> kSections = {"series",        "sample",        "blank",
                                                 "titer",         "calibration",   "conditioning",
                                                 "burette check", "check standard"};

/// The portions of a sample-like entry: "aliquots" (mL) or "masses" (g).
void read_portions(Reader& r, Entry& entry, bool required) {
  if (auto* e = r.find("masses"); e && lower(e->value).find("balance") != std::string::npos) {
    // Weighed on the connected balance before the series (weighing.hpp):
    // "balance" for every position, or a list where "balance" marks the
    // portions still to weigh (or that the balance could not weigh).
    if (r.find("aliquots"))
      r.errors().add(r.line_of("masses"), "masses",
                     "give either aliquots or masses for an entry, not both");
    if (lower(trim(e->value)) == "balance") {
      for (std::size_t i = 0; i < entry.positions.size(); ++i)
        entry.portions.push_back(Portion{0.0, 0.0, true});
      return;
    }
    for (const auto& item : split_commas(e->value)) {
      if (lower(item) == "balance") {
        entry.portions.push_back(Portion{0.0, 0.0, true});
        continue;
      }
      const bool bare = item.find_first_not_of("0123456789.eE+-") == std::string::npos;
      auto v = r.parse_quantity(bare ? item + " g" : item, e->line, "masses", kMass);
      if (!v)
        return;
      r.check_range(*v, e->line, "masses", 0.0, 1000.0, true, kMass);
      entry.portions.push_back(Portion{0.0, *v, true});
    }
    return;
  }
  auto aliquots = quantity_list(r, "aliquots", kVolume, 0.0, 1000.0, true);
  auto masses = quantity_list(r, "masses", kMass, 0.0, 1000.0, true);
  if (!aliquots.empty() && !masses.empty()) {
    r.errors().add(r.line_of("masses"), "masses",
                   "give either aliquots or masses for an entry, not both");
    return;
  }
  for (double v : aliquots)
    entry.portions.push_back(Portion{v, 0.0});
  for (double v : masses)
    entry.portions.push_back(Portion{0.0, v});
  if (required && entry.portions.empty())
    r.errors().add(r.line_of("id"), "aliquots",
                   "missing: each replicate needs its size (aliquots in mL or masses in g)");
}

}  // namespace

Result<Series> parse_series(std::string_view text, const std::string& origin) {
  Errors errors(origin);
  int last_line = 0;
  std::vector<Section> sections = split_sections(text, kSections, errors, &last_line);
  if (errors.failed())
    return errors.error();
  Series series;
  bool have_series = false;
  std::set<int> used_positions;
  int check_standards = 0;
  for (auto& section : sections) {
    Reader r(section, errors, "[" + section.name + "] section");
    if (section.name == "series") {
      if (have_series)
        errors.add(section.line, "series", "the [series] section may appear only once");
      have_series = true;
      series.name = one_line(r.text("name"));
      series.description = r.text("description", std::string());
      series.check_standard_every = r.integer("check standard every", 0, 1000, 0);
      r.finish({"name", "description", "check standard every"});
      continue;
    }
    Entry entry;
    entry.kind = *entry_kind_from_name(section.name);
    std::vector<std::string_view> known = {"id", "positions"};
    const bool titrates =
        entry.kind != EntryKind::calibration && entry.kind != EntryKind::burette_check;
    entry.id =
        r.text("id", entry.kind == EntryKind::sample || entry.kind == EntryKind::check_standard
                         ? std::nullopt
                         : std::optional<std::string>(section.name));
    entry.positions = position_list(r, "positions", true);
    if (titrates) {
      known.insert(known.end(), {"method", "method version", "replicates"});
      entry.method = r.text("method");
      entry.method_version = r.integer("method version", 0, 100000, 0);
      entry.replicates = r.integer("replicates", 0, 20, 0);
    }
    switch (entry.kind) {
      case EntryKind::sample:
      case EntryKind::check_standard:
        known.insert(known.end(), {"aliquots", "masses", "dilution factor", "density"});
        read_portions(r, entry, true);
        entry.dilution_factor = r.quantity("dilution factor", kNone, 1.0, 1e6, 1.0);
        entry.density_g_per_ml = r.quantity("density", kDensity, 0.0, 25.0, 0.0);
        if (entry.kind == EntryKind::check_standard) {
          known.insert(known.end(), {"expected", "tolerance"});
          if (auto* e = r.find("expected")) {
            const std::string v = trim(e->value);
            double x = 0.0;
            auto [ptr, ec] = std::from_chars(v.data(), v.data() + v.size(), x);
            const std::string unit = trim(std::string_view(ptr, v.data() + v.size() - ptr));
            bool known_unit = false;
            for (auto u : method::result_units())
              known_unit = known_unit || u == unit;
            if (ec != std::errc() || ptr == v.data() || !std::isfinite(x) || x <= 0.0)
              errors.add(e->line, "expected",
                         "'" + e->value + "' does not start with a number above 0");
            else if (!known_unit)
              errors.add(e->line, "expected",
                         "unknown result unit '" + unit +
                             "' (known: " + join(method::result_units()) + ")");
            entry.expected_value = x;
            entry.expected_unit = unit;
          } else {
            r.missing("expected");
          }
          entry.tolerance_percent = r.quantity("tolerance", kPercent, 0.0, 100.0, 2.0, true);
        }
        break;
      case EntryKind::blank:
      case EntryKind::conditioning:
        known.insert(known.end(), {"aliquots"});
        read_portions(r, entry, false);
        break;
      case EntryKind::titer:
        known.insert(known.end(), {"titrant", "standard", "standard molar mass", "purity",
                                   "titrant per standard", "masses"});
        entry.titrant = one_line(r.text("titrant"));
        entry.standard = one_line(r.text("standard", std::string("calcium carbonate")));
        entry.standard_molar_mass_g_per_mol =
            r.quantity("standard molar mass", kMolarMass, 0.0, 10000.0, std::nullopt, true);
        entry.standard_purity_percent = r.quantity("purity", kPercent, 50.0, 100.0, 100.0);
        entry.titrant_per_standard =
            r.quantity("titrant per standard", kNone, 0.0, 10.0, 1.0, true);
        read_portions(r, entry, false);
        if (entry.portions.empty() ||
            (entry.portions.front().mass_g <= 0.0 && !entry.portions.front().from_balance))
          errors.add(section.line, "masses", "a titer entry needs the masses of its standards (g)");
        break;
      case EntryKind::calibration:
        known.insert(known.end(),
                     {"electrode", "standards", "charge", "drift limit", "longest wait"});
        entry.electrode = one_line(r.text("electrode"));
        entry.standard_conc_mol_per_l = quantity_list(r, "standards", kConc, 0.0, 10.0, true);
        if (!errors.failed() &&
            (entry.standard_conc_mol_per_l.size() < 2 || entry.standard_conc_mol_per_l.size() > 5))
          errors.add(r.line_of("standards"), "standards",
                     "a calibration needs 2 to 5 standards, not " +
                         std::to_string(entry.standard_conc_mol_per_l.size()));
        entry.charge = r.integer("charge", 1, 4, 2);
        entry.settle_limit_mv_per_min = r.quantity("drift limit", kMvPerMin, 0.0, 100.0, 0.5, true);
        entry.longest_wait_s = r.quantity("longest wait", kTime, 1.0, 3600.0, 180.0);
        if (!errors.failed() && entry.positions.size() != entry.standard_conc_mol_per_l.size())
          errors.add(r.line_of("positions"), "positions",
                     "one position per standard: " + std::to_string(entry.positions.size()) +
                         " positions for " + std::to_string(entry.standard_conc_mol_per_l.size()) +
                         " standards");
        break;
      case EntryKind::burette_check:
        known.insert(known.end(), {"burette", "nominal volume", "test volume", "deliveries",
                                   "water temperature"});
        entry.burette = one_line(r.text("burette"));
        entry.nominal_volume_ml =
            r.quantity("nominal volume", kVolume, 0.0, 1000.0, std::nullopt, true);
        entry.test_volume_ml = r.quantity("test volume", kVolume, 0.0, 1000.0, std::nullopt, true);
        entry.deliveries = r.integer("deliveries", 2, 30, 5);
        entry.water_temperature_c = r.quantity("water temperature", kCelsius, 15.0, 30.0, 20.0);
        if (!errors.failed() && entry.test_volume_ml > entry.nominal_volume_ml)
          errors.add(r.line_of("test volume"), "test volume",
                     "larger than the burette's nominal volume");
        if (!errors.failed() && entry.positions.size() != 1)
          errors.add(r.line_of("positions"), "positions",
                     "a burette check uses one position (the vessel on the balance)");
        break;
    }
    r.finish(known);
    if (errors.failed())
      break;
    // Sizes and positions that cannot work together.
    const int line = r.line_of("positions");
    for (int p : entry.positions) {
      if (!used_positions.insert(p).second) {
        errors.add(line, "positions",
                   "position " + std::to_string(p) + " is used twice in the series");
        break;
      }
    }
    if (entry.replicates > 0 && static_cast<int>(entry.positions.size()) < entry.replicates &&
        entry.kind != EntryKind::check_standard)
      errors.add(line, "positions",
                 std::to_string(entry.positions.size()) + " positions for " +
                     std::to_string(entry.replicates) + " replicates");
    if (entry.portions.size() > 1 && entry.portions.size() != entry.positions.size() &&
        entry.kind != EntryKind::titer)
      errors.add(
          r.line_of(entry.portions.front().mass_g > 0.0 ? "masses" : "aliquots"),
          entry.portions.front().mass_g > 0.0 ? "masses" : "aliquots",
          "give one size for all or one per position: " + std::to_string(entry.portions.size()) +
              " sizes for " + std::to_string(entry.positions.size()) + " positions");
    if (entry.kind == EntryKind::titer && entry.portions.size() != entry.positions.size())
      errors.add(r.line_of("masses"), "masses",
                 "one mass per standard position: " + std::to_string(entry.portions.size()) +
                     " masses for " + std::to_string(entry.positions.size()) + " positions");
    if (entry.kind == EntryKind::check_standard && ++check_standards > 1 &&
        series.check_standard_every > 0)
      errors.add(section.line, "check standard",
                 "only one [check standard] entry when it repeats every N samples");
    if (errors.failed())
      break;
    series.entries.push_back(std::move(entry));
  }
  if (!errors.failed() && !have_series)
    errors.add(1, "series", "missing: the file needs a [series] section with the series' name");
  if (!errors.failed() && series.entries.empty())
    errors.add(last_line, "series", "the series holds no entries");
  if (errors.failed())
    return errors.error();
  return series;
}

std::string write_series(const Series& s) {
  std::ostringstream out;
  auto put = [&](const char* key, const std::string& value) {
    out << key << " = " << value << "\n";
  };
  out << "# veq series file (docs/series.md)\n[series]\n";
  put("name", one_line(s.name));
  if (!s.description.empty())
    put("description", one_line(s.description));
  put("check standard every", std::to_string(s.check_standard_every));
  for (const auto& e : s.entries) {
    out << "\n[" << entry_kind_name(e.kind) << "]\n";
    put("id", one_line(e.id));
    put("positions", positions_text(e.positions));
    const bool titrates = e.kind != EntryKind::calibration && e.kind != EntryKind::burette_check;
    if (titrates) {
      put("method", one_line(e.method));
      put("method version", std::to_string(e.method_version));
      put("replicates", std::to_string(e.replicates));
    }
    if (!e.portions.empty()) {
      std::vector<double> values;
      for (const auto& p : e.portions)
        values.push_back(p.mass_g > 0.0 ? p.mass_g : p.aliquot_ml);
      bool all_to_weigh = true;
      for (const auto& p : e.portions)
        all_to_weigh = all_to_weigh && p.from_balance && p.mass_g <= 0.0;
      if (all_to_weigh) {
        put("masses", "balance");
      } else if (e.portions.front().from_balance) {
        std::string list;
        for (const auto& p : e.portions)
          list += (list.empty() ? "" : ", ") +
                  (p.mass_g > 0.0 ? number(p.mass_g) + " g" : std::string("balance"));
        put("masses", list);
      } else if (e.portions.front().mass_g > 0.0) {
        put("masses", list_text(values, "g"));
      } else {
        put("aliquots", list_text(values, "mL"));
      }
    }
    switch (e.kind) {
      case EntryKind::sample:
      case EntryKind::check_standard:
        put("dilution factor", number(e.dilution_factor));
        put("density", number(e.density_g_per_ml) + " g/mL");
        if (e.kind == EntryKind::check_standard) {
          put("expected", number(e.expected_value) + " " + e.expected_unit);
          put("tolerance", number(e.tolerance_percent) + " %");
        }
        break;
      case EntryKind::titer:
        put("titrant", one_line(e.titrant));
        put("standard", one_line(e.standard));
        put("standard molar mass", number(e.standard_molar_mass_g_per_mol) + " g/mol");
        put("purity", number(e.standard_purity_percent) + " %");
        put("titrant per standard", number(e.titrant_per_standard));
        break;
      case EntryKind::calibration:
        put("electrode", one_line(e.electrode));
        put("standards", list_text(e.standard_conc_mol_per_l, "mol/L"));
        put("charge", std::to_string(e.charge));
        put("drift limit", number(e.settle_limit_mv_per_min) + " mV/min");
        put("longest wait", number(e.longest_wait_s) + " s");
        break;
      case EntryKind::burette_check:
        put("burette", one_line(e.burette));
        put("nominal volume", number(e.nominal_volume_ml) + " mL");
        put("test volume", number(e.test_volume_ml) + " mL");
        put("deliveries", std::to_string(e.deliveries));
        put("water temperature", number(e.water_temperature_c) + " °C");
        break;
      case EntryKind::blank:
      case EntryKind::conditioning:
        break;
    }
  }
  return out.str();
}

Result<Series> read_series_file(const std::string& path) {
  std::ifstream in(path, std::ios::binary);
  if (!in)
    return make_error(ErrorKind::not_found, "cannot open series file '" + path + "'");
  std::ostringstream text;
  text << in.rdbuf();
  return parse_series(text.str(), path);
}

const char* entry_kind_name(EntryKind kind) {
  switch (kind) {
    case EntryKind::sample:
      return "sample";
    case EntryKind::blank:
      return "blank";
    case EntryKind::titer:
      return "titer";
    case EntryKind::calibration:
      return "calibration";
    case EntryKind::conditioning:
      return "conditioning";
    case EntryKind::burette_check:
      return "burette check";
    case EntryKind::check_standard:
      return "check standard";
  }
  return "unknown";
}

std::optional<EntryKind> entry_kind_from_name(std::string_view name) {
  for (int k = 1; k <= 7; ++k) {
    const auto kind = static_cast<EntryKind>(k);
    if (name == entry_kind_name(kind))
      return kind;
  }
  return std::nullopt;
}

}  // namespace veq::series
