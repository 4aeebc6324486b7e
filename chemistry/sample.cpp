#include "chemistry/sample.hpp"

#include <cmath>
#include <set>

namespace veq::chemistry {

namespace {

using nlohmann::json;

Error bad(const std::string& where, const std::string& what) {
  return make_error(ErrorKind::invalid_input, "sample document, " + where + " " + what);
}

const std::set<std::string>& known_top_fields() {
  static const std::set<std::string> fields = {"sample_volume_ml",
                                               "metals",
                                               "ph",
                                               "strong_acid_mol_per_l",
                                               "buffer",
                                               "ligands",
                                               "titrant",
                                               "indicator",
                                               "ionic_strength_mol_per_l",
                                               "signal",
                                               "curve",
                                               "comment"};
  return fields;
}

// A number field: required unless a fallback is given; `positive` demands > 0.
Result<double> number(const json& j, const std::string& key, const std::string& where,
                      std::optional<double> fallback, bool positive, bool non_negative = false) {
  const auto it = j.find(key);
  if (it == j.end() || it->is_null()) {
    if (fallback)
      return *fallback;
    return bad(where + key, "is missing");
  }
  if (!it->is_number())
    return bad(where + key, "must be a number");
  const double v = it->get<double>();
  if (!std::isfinite(v))
    return bad(where + key, "must be finite");
  if (positive && !(v > 0.0))
    return bad(where + key, "must be a number > 0");
  if (non_negative && v < 0.0)
    return bad(where + key, "must be >= 0");
  return v;
}

Result<std::string> text(const json& j, const std::string& key, const std::string& where,
                         std::optional<std::string> fallback = std::nullopt) {
  const auto it = j.find(key);
  if (it == j.end() || it->is_null()) {
    if (fallback)
      return *fallback;
    return bad(where + key, "is missing");
  }
  if (!it->is_string() || it->get<std::string>().empty()) {
    return bad(where + key, "must be a non-empty string");
  }
  return it->get<std::string>();
}

Result<SampleLigand> ligand(const json& j, const std::string& where) {
  if (!j.is_object())
    return bad(where, "must be an object");
  SampleLigand l;
  auto name = text(j, "name", where + ".");
  if (!name)
    return name.error();
  l.name = *name;
  auto total = number(j, "total_mol_per_l", where + ".", std::nullopt, false, true);
  if (!total)
    return total.error();
  l.total_mol_per_l = *total;
  auto protons = number(j, "protons_per_formula", where + ".", 0.0, false, true);
  if (!protons)
    return protons.error();
  l.protons_per_formula = *protons;
  return l;
}

}  // namespace

const char* signal_kind_name(SignalKind kind) {
  switch (kind) {
    case SignalKind::p_metal:
      return "pM";
    case SignalKind::potential:
      return "potential";
    case SignalKind::absorbance:
      return "absorbance";
  }
  return "pM";
}

Result<SampleComposition> parse_sample_json(std::string_view document) {
  json root;
  try {
    root = json::parse(document.begin(), document.end());
  } catch (const json::exception& e) {  // parse_error, or out_of_range for a number too large
    return make_error(ErrorKind::invalid_input,
                      std::string("sample document is not valid JSON: ") + e.what());
  }
  if (!root.is_object())
    return bad("top level", "must be an object");
  for (const auto& [key, value] : root.items()) {
    if (!known_top_fields().count(key)) {
      return bad("field '" + key + "'", "is not known (see docs/chemistry.md for the format)");
    }
  }
  SampleComposition s;
  auto volume = number(root, "sample_volume_ml", "", std::nullopt, true);
  if (!volume)
    return volume.error();
  s.sample_volume_ml = *volume;

  const auto metals = root.find("metals");
  if (metals == root.end() || !metals->is_array() || metals->empty()) {
    return bad("metals", "must be a non-empty array of {\"name\", \"conc_mol_per_l\"}");
  }
  for (std::size_t i = 0; i < metals->size(); ++i) {
    const std::string where = "metals[" + std::to_string(i) + "]";
    const json& m = (*metals)[i];
    if (!m.is_object())
      return bad(where, "must be an object");
    auto name = text(m, "name", where + ".");
    if (!name)
      return name.error();
    auto conc = number(m, "conc_mol_per_l", where + ".", std::nullopt, true);
    if (!conc)
      return conc.error();
    s.metals.push_back({*name, *conc});
  }

  if (const auto ph = root.find("ph"); ph != root.end() && !ph->is_null()) {
    auto v = number(root, "ph", "", std::nullopt, false);
    if (!v)
      return v.error();
    if (*v < 0.0 || *v > 14.0)
      return bad("ph", "must be within 0..14");
    s.ph = *v;
  }
  auto acid = number(root, "strong_acid_mol_per_l", "", 0.0, false);
  if (!acid)
    return acid.error();
  s.strong_acid_mol_per_l = *acid;

  if (const auto b = root.find("buffer"); b != root.end() && !b->is_null()) {
    auto l = ligand(*b, "buffer");
    if (!l)
      return l.error();
    s.ligands.push_back(*l);
  }
  if (const auto ls = root.find("ligands"); ls != root.end() && !ls->is_null()) {
    if (!ls->is_array())
      return bad("ligands", "must be an array");
    for (std::size_t i = 0; i < ls->size(); ++i) {
      auto l = ligand((*ls)[i], "ligands[" + std::to_string(i) + "]");
      if (!l)
        return l.error();
      s.ligands.push_back(*l);
    }
  }

  const auto t = root.find("titrant");
  if (t == root.end() || !t->is_object()) {
    return bad("titrant", "must be an object {\"name\", \"conc_mol_per_l\"}");
  }
  auto tname = text(*t, "name", "titrant.", std::string("EDTA"));
  if (!tname)
    return tname.error();
  s.titrant.name = *tname;
  auto tconc = number(*t, "conc_mol_per_l", "titrant.", std::nullopt, true);
  if (!tconc)
    return tconc.error();
  s.titrant.conc_mol_per_l = *tconc;
  auto tprot = number(*t, "protons_per_formula", "titrant.", 2.0, false, true);
  if (!tprot)
    return tprot.error();
  s.titrant.protons_per_formula = *tprot;

  if (const auto ind = root.find("indicator"); ind != root.end() && !ind->is_null()) {
    if (!ind->is_object())
      return bad("indicator", "must be an object");
    IndicatorSpec spec;
    auto name = text(*ind, "name", "indicator.");
    if (!name)
      return name.error();
    spec.name = *name;
    auto conc = number(*ind, "conc_mol_per_l", "indicator.", std::nullopt, true);
    if (!conc)
      return conc.error();
    spec.conc_mol_per_l = *conc;
    s.indicator = spec;
  }

  if (const auto i = root.find("ionic_strength_mol_per_l"); i != root.end() && !i->is_null()) {
    auto v = number(root, "ionic_strength_mol_per_l", "", std::nullopt, false, true);
    if (!v)
      return v.error();
    if (*v > 1.0)
      return bad("ionic_strength_mol_per_l", "must be <= 1 (Davies equation range)");
    s.ionic_strength_mol_per_l = *v;
  }

  if (const auto sig = root.find("signal"); sig != root.end() && !sig->is_null()) {
    if (!sig->is_object())
      return bad("signal", "must be an object");
    auto kind = text(*sig, "kind", "signal.", std::string("pM"));
    if (!kind)
      return kind.error();
    if (*kind == "pM") {
      s.signal.kind = SignalKind::p_metal;
    } else if (*kind == "potential") {
      s.signal.kind = SignalKind::potential;
    } else if (*kind == "absorbance") {
      s.signal.kind = SignalKind::absorbance;
    } else {
      return bad("signal.kind", "must be \"pM\", \"potential\" or \"absorbance\"");
    }
    auto metal = text(*sig, "metal", "signal.", std::string());
    if (!metal)
      return metal.error();
    s.signal.metal = *metal;
    auto e0 = number(*sig, "standard_potential_mv", "signal.", 0.0, false);
    auto slope = number(*sig, "slope_percent", "signal.", 100.0, true);
    auto temp = number(*sig, "temperature_c", "signal.", 25.0, false);
    auto path = number(*sig, "path_length_cm", "signal.", 1.0, true);
    if (!e0)
      return e0.error();
    if (!slope)
      return slope.error();
    if (!temp)
      return temp.error();
    if (!path)
      return path.error();
    s.signal.standard_potential_mv = *e0;
    s.signal.slope_percent = *slope;
    s.signal.temperature_c = *temp;
    s.signal.path_length_cm = *path;
    if (s.signal.kind == SignalKind::absorbance) {
      auto wl = number(*sig, "wavelength_nm", "signal.", std::nullopt, true);
      if (!wl)
        return wl.error();
      s.signal.wavelength_nm = *wl;
      if (!s.indicator)
        return bad("signal", "absorbance needs an indicator in the sample");
    }
  }

  if (const auto c = root.find("curve"); c != root.end() && !c->is_null()) {
    if (!c->is_object())
      return bad("curve", "must be an object");
    auto end = number(*c, "end_volume_ml", "curve.", 0.0, false, true);
    if (!end)
      return end.error();
    s.curve.end_volume_ml = *end;
    auto points = number(*c, "points", "curve.", 500.0, true);
    if (!points)
      return points.error();
    if (*points < 3.0 || *points > 100000.0 || std::floor(*points) != *points) {
      return bad("curve.points", "must be a whole number within 3..100000");
    }
    s.curve.points = static_cast<int>(*points);
  }
  return s;
}

nlohmann::json to_json(const SampleComposition& s) {
  json j;
  j["sample_volume_ml"] = s.sample_volume_ml;
  j["metals"] = json::array();
  for (const auto& m : s.metals)
    j["metals"].push_back({{"name", m.name}, {"conc_mol_per_l", m.conc_mol_per_l}});
  if (s.ph)
    j["ph"] = *s.ph;
  if (s.strong_acid_mol_per_l != 0.0)
    j["strong_acid_mol_per_l"] = s.strong_acid_mol_per_l;
  j["ligands"] = json::array();
  for (const auto& l : s.ligands) {
    j["ligands"].push_back({{"name", l.name},
                            {"total_mol_per_l", l.total_mol_per_l},
                            {"protons_per_formula", l.protons_per_formula}});
  }
  j["titrant"] = {{"name", s.titrant.name},
                  {"conc_mol_per_l", s.titrant.conc_mol_per_l},
                  {"protons_per_formula", s.titrant.protons_per_formula}};
  if (s.indicator) {
    j["indicator"] = {{"name", s.indicator->name}, {"conc_mol_per_l", s.indicator->conc_mol_per_l}};
  }
  if (s.ionic_strength_mol_per_l)
    j["ionic_strength_mol_per_l"] = *s.ionic_strength_mol_per_l;
  json sig = {{"kind", signal_kind_name(s.signal.kind)}};
  if (!s.signal.metal.empty())
    sig["metal"] = s.signal.metal;
  if (s.signal.kind == SignalKind::potential) {
    sig["standard_potential_mv"] = s.signal.standard_potential_mv;
    sig["slope_percent"] = s.signal.slope_percent;
    sig["temperature_c"] = s.signal.temperature_c;
  }
  if (s.signal.kind == SignalKind::absorbance) {
    sig["wavelength_nm"] = s.signal.wavelength_nm;
    sig["path_length_cm"] = s.signal.path_length_cm;
  }
  j["signal"] = sig;
  j["curve"] = {{"end_volume_ml", s.curve.end_volume_ml}, {"points", s.curve.points}};
  return j;
}

}  // namespace veq::chemistry
