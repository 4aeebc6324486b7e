#include "simulator/scenario.hpp"

#include "simulator/vessel.hpp"

#include <filesystem>
#include <fstream>
#include <nlohmann/json.hpp>
#include <sstream>

namespace veq::simulator {

namespace {

using nlohmann::json;

struct Reader {
  std::string source;
  std::string error;

  bool fail(const std::string& where, const std::string& what) {
    if (error.empty())
      error = source + ": " + where + ": " + what;
    return false;
  }

  bool number(const json& obj, const char* section, const char* key, double& out, bool required,
              double min, double max) {
    const std::string where = std::string(section) + "." + key;
    if (!obj.contains(key))
      return required ? fail(where, "missing") : true;
    const json& v = obj.at(key);
    if (!v.is_number())
      return fail(where, "must be a number");
    const double d = v.get<double>();
    if (!(d >= min && d <= max)) {
      return fail(where, "value " + v.dump() + " is outside " + std::to_string(min) + " .. " +
                             std::to_string(max));
    }
    out = d;
    return true;
  }

  bool text(const json& obj, const char* section, const char* key, std::string& out) {
    if (!obj.contains(key))
      return true;
    if (!obj.at(key).is_string())
      return fail(std::string(section) + "." + key, "must be text");
    out = obj.at(key).get<std::string>();
    return true;
  }

  const json* section(const json& doc, const char* name, bool required) {
    if (!doc.contains(name)) {
      if (required)
        fail(name, "section missing");
      return nullptr;
    }
    if (!doc.at(name).is_object()) {
      fail(name, "must be an object { ... }");
      return nullptr;
    }
    return &doc.at(name);
  }

  bool integer(const json& obj, const char* section, const char* key, int& out, int min, int max) {
    double v = out;
    if (!number(obj, section, key, v, false, min, max))
      return false;
    if (v != static_cast<int>(v))
      return fail(std::string(section) + "." + key, "must be a whole number");
    out = static_cast<int>(v);
    return true;
  }

  bool boolean(const json& obj, const char* section, const char* key, bool& out) {
    if (!obj.contains(key))
      return true;
    if (!obj.at(key).is_boolean())
      return fail(std::string(section) + "." + key, "must be true or false");
    out = obj.at(key).get<bool>();
    return true;
  }

  bool band(const json& obj, const char* section, const char* key, AbsorptionBand& out) {
    if (!obj.contains(key))
      return true;
    const std::string where = std::string(section) + "." + key;
    if (!obj.at(key).is_object())
      return fail(where,
                  "must be { \"peak_nm\": N, \"epsilon_l_per_mol_cm\": N, \"width_nm\": N }");
    const json& b = obj.at(key);
    return number(b, where.c_str(), "peak_nm", out.peak_nm, false, 100.0, 3000.0) &&
           number(b, where.c_str(), "epsilon_l_per_mol_cm", out.epsilon_l_per_mol_cm, false, 0.0,
                  1e6) &&
           number(b, where.c_str(), "width_nm", out.width_nm, false, 1.0, 1000.0);
  }

  bool reagent(const json& obj, const char* section, const char* key, ReagentSpec& out) {
    if (!obj.contains(key))
      return true;
    const std::string where = std::string(section) + "." + key;
    const json& r = obj.at(key);
    if (r.is_boolean()) {
      out.present = r.get<bool>();
      return true;
    }
    if (!r.is_object())
      return fail(where, "must be false, true or { \"reservoir_ml\": N }");
    out.present = true;
    return number(r, where.c_str(), "reservoir_ml", out.reservoir_ml, false, 0.0, 1e6) &&
           number(r, where.c_str(), "metal_conc_mol_per_l", out.metal_conc_mol_per_l, false, 0.0,
                  1.0) &&
           number(r, where.c_str(), "strong_acid_mol_per_l", out.strong_acid_mol_per_l, false,
                  -20.0, 20.0);
  }

  bool burette(const json& j, const char* section, BuretteSpec& out, FaultPlan& fault_out) {
    text(j, section, "model", out.model);
    number(j, section, "cylinder_ml", out.cylinder_ml, false, 0.1, 1000.0);
    number(j, section, "steps_per_cylinder", out.steps_per_cylinder, false, 10, 1e8);
    number(j, section, "max_rate_ml_per_min", out.max_rate_ml_per_min, false, 0.01, 1000.0);
    number(j, section, "max_dose_ml", out.max_dose_ml, false, 0.001, 1000.0);
    number(j, section, "systematic_error_percent", out.systematic_error_percent, false, -10.0,
           10.0);
    number(j, section, "random_error_ml", out.random_error_ml, false, 0.0, 1.0);
    number(j, section, "reservoir_ml", out.reservoir_ml, false, 0.0, 1e6);
    text(j, section, "serial_number", out.serial_number);
    number(j, section, "max_fill_rate_ml_per_min", out.max_fill_rate_ml_per_min, false, 0.0,
           1000.0);
    integer(j, section, "ports", out.ports, 0, 16);
    motor_fault(j, section, out.motor_fault);
    fault(j, section, fault_out);
    return error.empty();
  }

  bool motor_fault(const json& obj, const char* section, MotorFault& out) {
    if (!obj.contains("motor_fault"))
      return true;
    const json& f = obj.at("motor_fault");
    const std::string where = std::string(section) + ".motor_fault";
    if (!f.is_object() || !f.contains("kind") || !f.at("kind").is_string()) {
      return fail(where, "must be { \"kind\": \"stalled|overload|empty\", \"after_s\": N }");
    }
    bool ok = false;
    out.kind = motor_fault_kind_from_name(f.at("kind").get<std::string>(), &ok);
    if (!ok)
      return fail(where + ".kind", "unknown motor fault '" + f.at("kind").get<std::string>() + "'");
    return number(f, where.c_str(), "after_s", out.after_s, false, 0.0, 1e9);
  }

  bool fault(const json& obj, const char* section, FaultPlan& out) {
    if (!obj.contains("fault"))
      return true;
    const json& f = obj.at("fault");
    const std::string where = std::string(section) + ".fault";
    if (!f.is_object() || !f.contains("kind") || !f.at("kind").is_string()) {
      return fail(where,
                  "must be { \"kind\": \"silence|garbage|partial_line|slow_replies|"
                  "disconnect|dead|spikes|out_of_range|never_stable\", \"after_s\": N }");
    }
    bool ok = false;
    out.kind = fault_kind_from_name(f.at("kind").get<std::string>(), &ok);
    if (!ok)
      return fail(where + ".kind", "unknown fault '" + f.at("kind").get<std::string>() + "'");
    return number(f, where.c_str(), "after_s", out.after_s, false, 0.0, 1e9) &&
           number(f, where.c_str(), "until_s", out.until_s, false, 0.0, 1e300) &&
           number(f, where.c_str(), "delay_ms", out.delay_ms, false, 0.0, 3.6e6) &&
           number(f, where.c_str(), "probability", out.probability, false, 0.0, 1.0) &&
           number(f, where.c_str(), "size", out.size, false, 0.0, 1e6);
  }
};

/// A chemistry section (the scenario's or a rack position's) into chem, and
/// what the 1:1 fields would hold (blank metal's content, sample volume)
/// into sample, for the truths.
void read_chemistry(Reader& r, const json& c, const json& doc, const std::string& where,
                    ChemistrySpec& chem, SampleSpec& sample) {
  if (!c.is_object()) {
    r.fail(where, "must be a chemistry sample object (docs/chemistry.md)");
    return;
  }
  chem.present = true;
  json copy = c;
  copy.erase("blank_metal");
  copy.erase("premixed_titrant_mol");
  // The titrant is the scenario's (its true concentration replaces this
  // one when the vessel is built); the section may leave it out.
  if (!copy.contains("titrant")) {
    std::string name = "EDTA";
    if (doc.contains("titrant") && doc.at("titrant").is_object() &&
        doc.at("titrant").contains("name") && doc.at("titrant").at("name").is_string())
      name = doc.at("titrant").at("name").get<std::string>();
    copy["titrant"] = json{{"name", name}, {"conc_mol_per_l", 1.0}};
  }
  r.number(c, where.c_str(), "premixed_titrant_mol", chem.premixed_titrant_mol, false, 0.0, 1.0);
  chem.sample_json = copy.dump();
  r.text(c, where.c_str(), "blank_metal", chem.blank_metal);
  if (c.contains("sample_volume_ml") && c.at("sample_volume_ml").is_number())
    sample.volume_ml = c.at("sample_volume_ml").get<double>();
  if (c.contains("metals") && c.at("metals").is_array()) {
    for (const json& m : c.at("metals")) {
      if (!m.is_object() || !m.contains("name") || !m.contains("conc_mol_per_l") ||
          !m.at("name").is_string() || !m.at("conc_mol_per_l").is_number())
        continue;
      const std::string name = m.at("name").get<std::string>();
      if (chem.blank_metal.empty())
        chem.blank_metal = name;
      if (name == chem.blank_metal) {
        sample.metal = name;
        sample.metal_conc_mol_per_l = m.at("conc_mol_per_l").get<double>();
      }
    }
  }
}

/// One vessel of the rack; the sample, changer and chemistry sections are read.
void read_rack_position(Reader& r, const json& j, const json& doc, std::size_t index, Scenario& s) {
  const std::string where = "rack[" + std::to_string(index) + "]";
  const char* w = where.c_str();
  if (!j.is_object()) {
    r.fail(where, "must be { \"position\": N, \"label\": ..., ... }");
    return;
  }
  RackPosition p;
  p.sample = s.sample;
  p.chemistry = s.chemistry;
  const int positions = s.sample_changer.positions;
  if (!j.contains("position")) {
    r.fail(where + ".position", "missing (1 to " + std::to_string(positions) + ")");
    return;
  }
  const json& pos = j.at("position");
  if (!pos.is_number_integer() || pos.get<long long>() < 1 || pos.get<long long>() > positions) {
    r.fail(where + ".position", "must be a whole number from 1 to " + std::to_string(positions) +
                                    " (sample_changer.positions), not " + pos.dump());
    return;
  }
  p.position = pos.get<int>();
  for (const RackPosition& other : s.rack) {
    if (other.position == p.position) {
      r.fail(where + ".position",
             "position " + std::to_string(p.position) + " is already in the rack");
      return;
    }
  }
  r.text(j, w, "label", p.label);
  r.boolean(j, w, "on_balance", p.on_balance);
  const bool own_chemistry = j.contains("chemistry");
  if (own_chemistry) {
    p.chemistry = ChemistrySpec{};
    read_chemistry(r, j.at("chemistry"), doc, where + ".chemistry", p.chemistry, p.sample);
  }
  static const char* const kOneToOne[] = {
      "metal_conc_mol_per_l", "metal_mol", "mass_g", "purity_percent",
      "molar_mass_g_per_mol", "metal",     "charge", "log10_formation_constant",
      "alpha_metal"};
  for (const char* key : kOneToOne) {
    if (j.contains(key) && (p.chemistry.present || p.on_balance)) {
      r.fail(where + "." + key,
             p.on_balance ? "an on_balance vessel holds water only"
             : own_chemistry
                 ? "the position's chemistry section holds its metals"
                 : "the scenario's chemistry section holds the metals; give the position its "
                   "own chemistry section");
      return;
    }
  }
  if (j.contains("metal_conc_mol_per_l") && j.contains("metal_mol")) {
    r.fail(where, "give metal_conc_mol_per_l or metal_mol, not both");
    return;
  }
  r.text(j, w, "metal", p.sample.metal);
  r.integer(j, w, "charge", p.sample.charge, 1, 4);
  r.number(j, w, "volume_ml", p.sample.volume_ml, false, 0.1, 1000.0);
  r.number(j, w, "metal_conc_mol_per_l", p.sample.metal_conc_mol_per_l, false, 1e-9, 2.0);
  double metal_mol = 0.0;
  if (r.number(j, w, "metal_mol", metal_mol, false, 1e-15, 1.0) && j.contains("metal_mol"))
    p.sample.metal_conc_mol_per_l = metal_mol * 1000.0 / p.sample.volume_ml;
  r.number(j, w, "ph", p.sample.ph, false, 0.0, 14.0);
  r.number(j, w, "log10_formation_constant", p.sample.log10_formation_constant, false, 0.0, 40.0);
  r.number(j, w, "alpha_metal", p.sample.alpha_metal, false, 1e-30, 1.0);
  r.number(j, w, "reaction_time_s", p.sample.reaction_time_s, false, 0.0, 3600.0);
  r.number(j, w, "blank_metal_mol", p.sample.blank_metal_mol, false, 0.0, 1.0);
  r.number(j, w, "buffer_capacity_mol_per_ph", p.sample.buffer_capacity_mol_per_ph, false, 0.0,
           100.0);
  if (j.contains("mass_g")) {
    p.standard.present = true;
    r.number(j, w, "mass_g", p.standard.mass_g, true, 1e-9, 1000.0);
    r.number(j, w, "purity_percent", p.standard.purity_percent, false, 1.0, 100.0);
    r.number(j, w, "molar_mass_g_per_mol", p.standard.molar_mass_g_per_mol, false, 1.0, 10000.0);
    if (j.contains("metal_conc_mol_per_l") || j.contains("metal_mol")) {
      r.fail(where + ".mass_g",
             "a standard's metal is its mass; leave out metal_conc_mol_per_l "
             "and metal_mol");
      return;
    }
  } else {
    for (const char* key : {"purity_percent", "molar_mass_g_per_mol"}) {
      if (j.contains(key)) {
        r.fail(where + "." + key, "belongs to a standard (needs mass_g)");
        return;
      }
    }
  }
  s.rack.push_back(std::move(p));
}

}  // namespace

FaultKind fault_kind_from_name(std::string_view name, bool* ok) {
  *ok = true;
  if (name == "none")
    return FaultKind::none;
  if (name == "silence")
    return FaultKind::silence;
  if (name == "garbage")
    return FaultKind::garbage;
  if (name == "partial_line")
    return FaultKind::partial_line;
  for (FaultKind k : {FaultKind::slow_replies, FaultKind::disconnect, FaultKind::dead,
                      FaultKind::spikes, FaultKind::out_of_range, FaultKind::never_stable}) {
    if (name == fault_kind_name(k))
      return k;
  }
  *ok = false;
  return FaultKind::none;
}

MotorFaultKind motor_fault_kind_from_name(std::string_view name, bool* ok) {
  *ok = true;
  if (name == "none")
    return MotorFaultKind::none;
  if (name == "stalled")
    return MotorFaultKind::stalled;
  if (name == "overload")
    return MotorFaultKind::overload;
  if (name == "empty")
    return MotorFaultKind::empty;
  *ok = false;
  return MotorFaultKind::none;
}

const char* motor_fault_kind_name(MotorFaultKind kind) {
  switch (kind) {
    case MotorFaultKind::none:
      return "none";
    case MotorFaultKind::stalled:
      return "stalled";
    case MotorFaultKind::overload:
      return "overload";
    case MotorFaultKind::empty:
      return "empty";
  }
  return "none";
}

const char* fault_kind_name(FaultKind kind) {
  switch (kind) {
    case FaultKind::none:
      return "none";
    case FaultKind::silence:
      return "silence";
    case FaultKind::garbage:
      return "garbage";
    case FaultKind::partial_line:
      return "partial_line";
    case FaultKind::slow_replies:
      return "slow_replies";
    case FaultKind::disconnect:
      return "disconnect";
    case FaultKind::dead:
      return "dead";
    case FaultKind::spikes:
      return "spikes";
    case FaultKind::out_of_range:
      return "out_of_range";
    case FaultKind::never_stable:
      return "never_stable";
  }
  return "none";
}

Result<Scenario> parse_scenario(std::string_view json_text, std::string_view source_name) {
  Reader r{std::string(source_name), {}};
  json doc;
  try {
    doc = json::parse(json_text.begin(), json_text.end());
  } catch (const json::parse_error& e) {
    // Turn the byte offset into a line number for people.
    std::size_t line = 1;
    for (std::size_t i = 0; i < e.byte && i < json_text.size(); ++i) {
      if (json_text[i] == '\n')
        ++line;
    }
    return make_error(ErrorKind::invalid_input, r.source + ": line " + std::to_string(line) +
                                                    ": not valid JSON (" + e.what() + ")");
  } catch (const json::exception& e) {  // out_of_range: a number too large for a double
    return make_error(ErrorKind::invalid_input,
                      r.source + ": not a usable JSON document (" + e.what() + ")");
  }
  if (!doc.is_object())
    return make_error(ErrorKind::invalid_input, r.source + ": not a JSON object");

  Scenario s;
  r.text(doc, "scenario", "name", s.name);
  if (doc.contains("seed")) {
    if (!doc.at("seed").is_number_unsigned()) {
      r.fail("seed", "must be a whole number >= 0");
    } else {
      s.seed = doc.at("seed").get<std::uint64_t>();
    }
  }
  const bool general = doc.contains("chemistry");
  if (general)
    read_chemistry(r, doc.at("chemistry"), doc, "chemistry", s.chemistry, s.sample);
  if (general && doc.contains("sample")) {
    if (const json* j = r.section(doc, "sample", false)) {
      r.number(*j, "sample", "blank_metal_mol", s.sample.blank_metal_mol, false, 0.0, 1.0);
      r.number(*j, "sample", "reaction_time_s", s.sample.reaction_time_s, false, 0.0, 3600.0);
      r.number(*j, "sample", "buffer_capacity_mol_per_ph", s.sample.buffer_capacity_mol_per_ph,
               false, 0.0, 100.0);
    }
  } else if (const json* j = general ? nullptr : r.section(doc, "sample", true)) {
    r.text(*j, "sample", "metal", s.sample.metal);
    double charge = s.sample.charge;
    r.number(*j, "sample", "charge", charge, false, 1, 4);
    s.sample.charge = static_cast<int>(charge);
    r.number(*j, "sample", "metal_conc_mol_per_l", s.sample.metal_conc_mol_per_l, true, 1e-9, 2.0);
    r.number(*j, "sample", "volume_ml", s.sample.volume_ml, true, 0.1, 1000.0);
    r.number(*j, "sample", "ph", s.sample.ph, false, 0.0, 14.0);
    r.number(*j, "sample", "log10_formation_constant", s.sample.log10_formation_constant, true, 0.0,
             40.0);
    r.number(*j, "sample", "alpha_metal", s.sample.alpha_metal, false, 1e-30, 1.0);
    r.number(*j, "sample", "reaction_time_s", s.sample.reaction_time_s, false, 0.0, 3600.0);
    r.number(*j, "sample", "blank_metal_mol", s.sample.blank_metal_mol, false, 0.0, 1.0);
    r.number(*j, "sample", "buffer_capacity_mol_per_ph", s.sample.buffer_capacity_mol_per_ph, false,
             0.0, 100.0);
  }
  if (const json* j = r.section(doc, "titrant", true)) {
    r.text(*j, "titrant", "name", s.titrant.name);
    r.number(*j, "titrant", "label_conc_mol_per_l", s.titrant.label_conc_mol_per_l, true, 1e-6,
             2.0);
    s.titrant.true_conc_mol_per_l = s.titrant.label_conc_mol_per_l;
    r.number(*j, "titrant", "true_conc_mol_per_l", s.titrant.true_conc_mol_per_l, false, 1e-6, 2.0);
    if (j->contains("pka")) {
      const json& p = j->at("pka");
      if (!p.is_array() || p.empty()) {
        r.fail("titrant.pka", "must be a list of numbers");
      } else {
        for (std::size_t i = 0; i < p.size(); ++i) {
          if (!p[i].is_number()) {
            r.fail("titrant.pka[" + std::to_string(i) + "]", "must be a number");
            break;
          }
          s.titrant.pka.push_back(p[i].get<double>());
        }
      }
    } else if (!general) {
      r.fail("titrant.pka", "missing (acid constants of the titrant)");
    }
  }
  if (const json* j = r.section(doc, "burette", false))
    r.burette(*j, "burette", s.burette, s.burette_fault);
  s.second_burette.serial_number = "virtual-burette-2";
  if (const json* j = r.section(doc, "second_burette", false)) {
    r.burette(*j, "second_burette", s.second_burette, s.second_burette_fault);
    if (!doc.contains("second_titrant"))
      r.fail("second_burette", "needs a second_titrant section (what it holds)");
  }
  if (const json* j = r.section(doc, "second_titrant", false)) {
    auto& t = s.second_titrant;
    t.present = true;
    r.text(*j, "second_titrant", "name", t.name);
    if (!j->contains("metal"))
      r.fail("second_titrant.metal", "missing (the metal it is, e.g. \"zinc\")");
    r.text(*j, "second_titrant", "metal", t.metal);
    r.integer(*j, "second_titrant", "charge", t.charge, 1, 4);
    r.number(*j, "second_titrant", "label_conc_mol_per_l", t.label_conc_mol_per_l, true, 1e-6, 2.0);
    t.true_conc_mol_per_l = t.label_conc_mol_per_l;
    r.number(*j, "second_titrant", "true_conc_mol_per_l", t.true_conc_mol_per_l, false, 1e-6, 2.0);
    r.number(*j, "second_titrant", "log10_formation_constant", t.log10_formation_constant, true,
             0.0, 40.0);
    r.number(*j, "second_titrant", "alpha_metal", t.alpha_metal, false, 1e-30, 1.0);
    if (general)
      r.fail("second_titrant", "needs the 1:1 model (a scenario without a chemistry section)");
    if (r.error.empty() && t.metal == s.sample.metal)
      r.fail("second_titrant.metal",
             "must differ from the sample's metal '" + s.sample.metal + "'");
  }
  if (const json* j = r.section(doc, "electrode", false)) {
    r.text(*j, "electrode", "model", s.electrode.model);
    r.text(*j, "electrode", "electrode", s.electrode.electrode);
    r.number(*j, "electrode", "e0_mv", s.electrode.e0_mv, false, -2000.0, 2000.0);
    r.number(*j, "electrode", "slope_percent", s.electrode.slope_percent, false, 1.0, 150.0);
    r.number(*j, "electrode", "temperature_c", s.electrode.temperature_c, false, -5.0, 100.0);
    r.number(*j, "electrode", "noise_mv", s.electrode.noise_mv, false, 0.0, 100.0);
    r.number(*j, "electrode", "response_time_s", s.electrode.response_time_s, false, 0.0, 600.0);
    r.number(*j, "electrode", "drift_mv_per_min", s.electrode.drift_mv_per_min, false, -100.0,
             100.0);
    r.text(*j, "electrode", "serial_number", s.electrode.serial_number);
    r.number(*j, "electrode", "mixing_time_s", s.electrode.mixing_time_s, false, 0.0, 600.0);
    r.text(*j, "electrode", "metal", s.electrode.metal);
    if (j->contains("interferents")) {
      const json& list = j->at("interferents");
      if (!list.is_array()) {
        r.fail("electrode.interferents",
               "must be a list of { \"metal\": ..., \"coefficient\": N }");
      } else {
        for (std::size_t i = 0; i < list.size(); ++i) {
          const std::string where = "electrode.interferents[" + std::to_string(i) + "]";
          Interferent f;
          if (!list[i].is_object() || !list[i].contains("metal") ||
              !list[i].at("metal").is_string()) {
            r.fail(where, "must be { \"metal\": \"Mg\", \"coefficient\": N }");
            break;
          }
          f.metal = list[i].at("metal").get<std::string>();
          r.number(list[i], where.c_str(), "coefficient", f.coefficient, true, 0.0, 1e6);
          s.electrode.interferents.push_back(f);
        }
        if (!s.electrode.interferents.empty() && !general)
          r.fail("electrode.interferents",
                 "needs a chemistry section (the interfering metals' "
                 "free concentrations come from its equilibrium)");
      }
    }
    r.number(*j, "electrode", "detection_limit_mol_per_l", s.electrode.detection_limit_mol_per_l,
             false, 0.0, 1.0);
    r.boolean(*j, "electrode", "reports_ph", s.electrode.reports_ph);
    r.number(*j, "electrode", "ph_noise", s.electrode.ph_noise, false, 0.0, 1.0);
    r.fault(*j, "electrode", s.electrode_fault);
  }
  if (const json* j = r.section(doc, "auxiliary_doser", false)) {
    auto& d = s.auxiliary_doser;
    r.text(*j, "auxiliary_doser", "model", d.model);
    r.text(*j, "auxiliary_doser", "serial_number", d.serial_number);
    r.number(*j, "auxiliary_doser", "max_dose_ml", d.max_dose_ml, false, 0.001, 1000.0);
    r.number(*j, "auxiliary_doser", "max_rate_ml_per_min", d.max_rate_ml_per_min, false, 0.01,
             1000.0);
    r.number(*j, "auxiliary_doser", "systematic_error_percent", d.systematic_error_percent, false,
             -10.0, 10.0);
    r.reagent(*j, "auxiliary_doser", "buffer", d.buffer);
    r.reagent(*j, "auxiliary_doser", "masking_agent", d.masking_agent);
    r.reagent(*j, "auxiliary_doser", "indicator", d.indicator);
    r.reagent(*j, "auxiliary_doser", "water", d.water);
    r.reagent(*j, "auxiliary_doser", "acid", d.acid);
    r.reagent(*j, "auxiliary_doser", "base", d.base);
    r.motor_fault(*j, "auxiliary_doser", d.motor_fault);
    r.fault(*j, "auxiliary_doser", s.auxiliary_doser_fault);
  }
  if (const json* j = r.section(doc, "photometer", false)) {
    auto& p = s.photometer;
    r.text(*j, "photometer", "model", p.model);
    r.text(*j, "photometer", "serial_number", p.serial_number);
    r.number(*j, "photometer", "min_wavelength_nm", p.min_wavelength_nm, false, 100.0, 3000.0);
    r.number(*j, "photometer", "max_wavelength_nm", p.max_wavelength_nm, false, 100.0, 3000.0);
    r.number(*j, "photometer", "wavelength_nm", p.wavelength_nm, false, 100.0, 3000.0);
    r.number(*j, "photometer", "path_length_cm", p.path_length_cm, false, 0.01, 100.0);
    r.number(*j, "photometer", "baseline_absorbance", p.baseline_absorbance, false, 0.0, 5.0);
    r.number(*j, "photometer", "noise_absorbance", p.noise_absorbance, false, 0.0, 1.0);
    r.number(*j, "photometer", "stray_light_fraction", p.stray_light_fraction, false, 0.0, 1.0);
    r.band(*j, "photometer", "metal", p.metal);
    r.band(*j, "photometer", "complex", p.complex);
    r.band(*j, "photometer", "titrant", p.titrant);
    if (r.error.empty() &&
        (p.min_wavelength_nm > p.max_wavelength_nm || p.wavelength_nm < p.min_wavelength_nm ||
         p.wavelength_nm > p.max_wavelength_nm)) {
      r.fail("photometer.wavelength_nm", "must lie within min_wavelength_nm .. max_wavelength_nm");
    }
    r.fault(*j, "photometer", s.photometer_fault);
  }
  if (const json* j = r.section(doc, "balance", false)) {
    auto& b = s.balance;
    r.text(*j, "balance", "model", b.model);
    r.text(*j, "balance", "serial_number", b.serial_number);
    r.number(*j, "balance", "capacity_g", b.capacity_g, false, 0.001, 1e6);
    r.number(*j, "balance", "readability_g", b.readability_g, false, 1e-7, 100.0);
    r.number(*j, "balance", "load_g", b.load_g, false, 0.0, 1e6);
    r.boolean(*j, "balance", "receives_burette", b.receives_burette);
    r.number(*j, "balance", "density_g_per_ml", b.density_g_per_ml, false, 0.1, 30.0);
    r.number(*j, "balance", "noise_g", b.noise_g, false, 0.0, 100.0);
    r.number(*j, "balance", "settle_time_s", b.settle_time_s, false, 0.0, 600.0);
    r.number(*j, "balance", "stable_band_g", b.stable_band_g, false, 0.0, 100.0);
    r.number(*j, "balance", "offset_g", b.offset_g, false, -1e3, 1e3);
    r.number(*j, "balance", "sensitivity_error_percent", b.sensitivity_error_percent, false, -10.0,
             10.0);
    r.fault(*j, "balance", s.balance_fault);
  }
  if (const json* j = r.section(doc, "stirrer", false)) {
    auto& t = s.stirrer;
    r.text(*j, "stirrer", "model", t.model);
    r.text(*j, "stirrer", "serial_number", t.serial_number);
    r.number(*j, "stirrer", "max_speed_rpm", t.max_speed_rpm, false, 1.0, 1e5);
    r.number(*j, "stirrer", "min_speed_rpm", t.min_speed_rpm, false, 0.0, 1e5);
    r.number(*j, "stirrer", "ramp_rpm_per_s", t.ramp_rpm_per_s, false, 1.0, 1e6);
    r.number(*j, "stirrer", "decouple_above_rpm", t.decouple_above_rpm, false, 0.0, 1e5);
    if (r.error.empty() && t.min_speed_rpm > t.max_speed_rpm)
      r.fail("stirrer.min_speed_rpm", "must not exceed max_speed_rpm");
    r.fault(*j, "stirrer", s.stirrer_fault);
  }
  if (const json* j = r.section(doc, "sample_changer", false)) {
    auto& c = s.sample_changer;
    r.text(*j, "sample_changer", "model", c.model);
    r.text(*j, "sample_changer", "serial_number", c.serial_number);
    r.integer(*j, "sample_changer", "positions", c.positions, 1, 1000);
    r.number(*j, "sample_changer", "seconds_per_position", c.seconds_per_position, false, 0.0,
             600.0);
    r.number(*j, "sample_changer", "lift_time_s", c.lift_time_s, false, 0.0, 600.0);
    r.boolean(*j, "sample_changer", "rinse", c.rinse);
    r.integer(*j, "sample_changer", "blocked_position", c.blocked_position, 0, 1000);
    r.fault(*j, "sample_changer", s.sample_changer_fault);
  }
  if (const json* j = r.section(doc, "replay", false)) {
    auto& p = s.replay;
    p.present = true;
    r.text(*j, "replay", "role", p.role);
    if (p.role != "electrode" && p.role != "photometer")
      r.fail("replay.role", "must be \"electrode\" or \"photometer\"");
    std::string outside = "clamp";
    r.text(*j, "replay", "outside", outside);
    if (outside == "fault") {
      p.outside = ReplayOutside::fault;
    } else if (outside != "clamp") {
      r.fail("replay.outside", "must be \"clamp\" or \"fault\"");
    }
    r.text(*j, "replay", "file", p.file);
    const bool inline_points = j->contains("volume_ml") || j->contains("signal");
    if (inline_points == !p.file.empty()) {
      r.fail("replay", "needs either \"file\" (a CSV) or the lists \"volume_ml\" and \"signal\"");
    } else if (inline_points) {
      std::vector<double> columns[2];
      const char* keys[2] = {"volume_ml", "signal"};
      for (int c = 0; c < 2; ++c) {
        const json* list = j->contains(keys[c]) ? &j->at(keys[c]) : nullptr;
        if (!list || !list->is_array()) {
          r.fail(std::string("replay.") + keys[c], "must be a list of numbers");
          break;
        }
        for (std::size_t i = 0; i < list->size(); ++i) {
          if (!(*list)[i].is_number()) {
            r.fail(std::string("replay.") + keys[c] + "[" + std::to_string(i) + "]",
                   "must be a number");
            break;
          }
          columns[c].push_back((*list)[i].get<double>());
        }
      }
      if (r.error.empty()) {
        auto curve = replay_from_columns(columns[0], columns[1]);
        if (!curve) {
          r.fail("replay", curve.error().message);
        } else {
          p.volume_ml = std::move(curve->volume_ml);
          p.signal = std::move(curve->signal);
        }
      }
    }
  }
  if (doc.contains("rack")) {
    const json& rack = doc.at("rack");
    if (!rack.is_array()) {
      r.fail("rack", "must be a list of { \"position\": N, ... }");
    } else {
      for (std::size_t i = 0; i < rack.size() && r.error.empty(); ++i)
        read_rack_position(r, rack[i], doc, i, s);
    }
  }
  if (r.error.empty() && !general && !s.electrode.metal.empty() &&
      s.electrode.metal != s.sample.metal &&
      !(s.second_titrant.present && s.electrode.metal == s.second_titrant.metal)) {
    r.fail("electrode.metal", "'" + s.electrode.metal +
                                  "' is neither the sample's metal nor the second titrant's (a "
                                  "chemistry section names other metals)");
  }
  for (std::size_t i = 0; i < s.rack.size() && r.error.empty(); ++i) {
    const RackPosition& p = s.rack[i];
    const std::string where = "rack[" + std::to_string(i) + "]";
    if (s.second_titrant.present && p.chemistry.present)
      r.fail(where + ".chemistry", "a second titrant needs the 1:1 model in every vessel");
    if (!p.chemistry.present && !p.on_balance && !s.electrode.metal.empty() &&
        s.electrode.metal != p.sample.metal &&
        !(s.second_titrant.present && s.electrode.metal == s.second_titrant.metal)) {
      r.fail(where + ".metal", "'" + p.sample.metal + "' is not '" + s.electrode.metal +
                                   "', the metal the electrode senses (electrode.metal)");
    }
  }
  if (!r.error.empty())
    return make_error(ErrorKind::invalid_input, r.error);
  for (std::size_t i = 0; i < s.rack.size(); ++i) {
    if (!s.rack[i].chemistry.present)
      continue;
    // Each vessel's chemistry must build and solve now, as the scenario's own.
    const std::string where = r.source + ": rack[" + std::to_string(i) + "]";
    auto vessel = VesselModel::create(vessel_scenario(s, s.rack[i].position));
    if (!vessel)
      return make_error(ErrorKind::invalid_input, where + ": " + vessel.error().message);
    if (vessel->metal_index(s.electrode.metal) < 0) {
      return make_error(ErrorKind::invalid_input,
                        where + ".chemistry: holds no '" + s.electrode.metal +
                            "', the metal the electrode senses (electrode.metal)");
    }
    for (const Interferent& f : s.electrode.interferents) {
      if (vessel->metal_index(f.metal) < 0) {
        return make_error(ErrorKind::invalid_input, where + ".chemistry: holds no '" + f.metal +
                                                        "', an interferent of the electrode");
      }
    }
  }
  if (s.chemistry.present) {
    // The general chemistry must build and solve now, not when a device reads.
    auto vessel = VesselModel::create(s);
    if (!vessel)
      return make_error(ErrorKind::invalid_input, r.source + ": " + vessel.error().message);
    if (vessel->metal_index(s.electrode.metal) < 0) {
      return make_error(ErrorKind::invalid_input, r.source + ": electrode.metal: '" +
                                                      s.electrode.metal +
                                                      "' is not a metal of the chemistry section");
    }
    for (std::size_t i = 0; i < s.electrode.interferents.size(); ++i) {
      const std::string& m = s.electrode.interferents[i].metal;
      if (vessel->metal_index(m) < 0 || m.empty()) {
        return make_error(ErrorKind::invalid_input,
                          r.source + ": electrode.interferents[" + std::to_string(i) +
                              "].metal: '" + m + "' is not a metal of the chemistry section");
      }
    }
  }
  return s;
}

const RackPosition* rack_position(const Scenario& scenario, int position) {
  for (const RackPosition& p : scenario.rack) {
    if (p.position == position)
      return &p;
  }
  return nullptr;
}

Scenario vessel_scenario(const Scenario& scenario, int position) {
  Scenario v = scenario;
  const RackPosition* p = rack_position(scenario, position);
  if (!p)
    return v;
  v.sample = p->sample;
  v.chemistry = p->chemistry;
  if (p->standard.present)
    v.sample.metal_conc_mol_per_l = p->standard.metal_mol() * 1000.0 / v.sample.volume_ml;
  if (p->on_balance) {
    v.chemistry = ChemistrySpec{};
    // The trace is of the metal the electrode senses, whatever it is.
    if (!v.electrode.metal.empty() &&
        !(v.second_titrant.present && v.electrode.metal == v.second_titrant.metal))
      v.sample.metal = v.electrode.metal;
    v.sample.metal_conc_mol_per_l = kWaterTraceMetalMolPerL;
    v.sample.blank_metal_mol = 0.0;
  }
  return v;
}

Result<Scenario> load_scenario(const std::string& path) {
  std::ifstream in(path, std::ios::binary);
  if (!in)
    return make_error(ErrorKind::not_found, "cannot open scenario file '" + path + "'");
  std::ostringstream text;
  text << in.rdbuf();
  auto scenario = parse_scenario(text.str(), path);
  if (!scenario || !scenario->replay.present || scenario->replay.file.empty())
    return scenario;
  // The replayed curve's file lies beside the scenario unless its path is absolute.
  std::filesystem::path csv(scenario->replay.file);
  if (csv.is_relative())
    csv = std::filesystem::path(path).parent_path() / csv;
  std::ifstream curve_in(csv, std::ios::binary);
  if (!curve_in) {
    return make_error(ErrorKind::not_found,
                      path + ": replay.file: cannot open '" + csv.string() + "'");
  }
  std::ostringstream curve_text;
  curve_text << curve_in.rdbuf();
  auto curve = parse_replay_csv(curve_text.str(), csv.string());
  if (!curve)
    return curve.error();
  scenario->replay.volume_ml = std::move(curve->volume_ml);
  scenario->replay.signal = std::move(curve->signal);
  return scenario;
}

}  // namespace veq::simulator
