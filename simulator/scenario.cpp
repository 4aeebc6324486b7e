#include "simulator/scenario.hpp"

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

  bool fault(const json& obj, const char* section, FaultPlan& out) {
    if (!obj.contains("fault"))
      return true;
    const json& f = obj.at("fault");
    const std::string where = std::string(section) + ".fault";
    if (!f.is_object() || !f.contains("kind") || !f.at("kind").is_string()) {
      return fail(where, "must be { \"kind\": \"silence|garbage|partial_line\", \"after_s\": N }");
    }
    bool ok = false;
    out.kind = fault_kind_from_name(f.at("kind").get<std::string>(), &ok);
    if (!ok)
      return fail(where + ".kind", "unknown fault '" + f.at("kind").get<std::string>() + "'");
    return number(f, where.c_str(), "after_s", out.after_s, false, 0.0, 1e9);
  }
};

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
  *ok = false;
  return FaultKind::none;
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
  if (const json* j = r.section(doc, "sample", true)) {
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
    } else {
      r.fail("titrant.pka", "missing (acid constants of the titrant)");
    }
  }
  if (const json* j = r.section(doc, "burette", false)) {
    r.text(*j, "burette", "model", s.burette.model);
    r.number(*j, "burette", "cylinder_ml", s.burette.cylinder_ml, false, 0.1, 1000.0);
    r.number(*j, "burette", "steps_per_cylinder", s.burette.steps_per_cylinder, false, 10, 1e8);
    r.number(*j, "burette", "max_rate_ml_per_min", s.burette.max_rate_ml_per_min, false, 0.01,
             1000.0);
    r.number(*j, "burette", "max_dose_ml", s.burette.max_dose_ml, false, 0.001, 1000.0);
    r.number(*j, "burette", "systematic_error_percent", s.burette.systematic_error_percent, false,
             -10.0, 10.0);
    r.number(*j, "burette", "random_error_ml", s.burette.random_error_ml, false, 0.0, 1.0);
    r.number(*j, "burette", "reservoir_ml", s.burette.reservoir_ml, false, 0.0, 1e6);
    r.fault(*j, "burette", s.burette_fault);
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
    r.fault(*j, "electrode", s.electrode_fault);
  }
  if (!r.error.empty())
    return make_error(ErrorKind::invalid_input, r.error);
  return s;
}

Result<Scenario> load_scenario(const std::string& path) {
  std::ifstream in(path, std::ios::binary);
  if (!in)
    return make_error(ErrorKind::not_found, "cannot open scenario file '" + path + "'");
  std::ostringstream text;
  text << in.rdbuf();
  return parse_scenario(text.str(), path);
}

}  // namespace veq::simulator
