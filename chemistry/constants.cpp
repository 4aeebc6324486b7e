#include "chemistry/constants.hpp"

#include <algorithm>
#include <cmath>
#include <nlohmann/json.hpp>
#include <set>
#include <string>

namespace veq::chemistry {

namespace {

using nlohmann::json;

Error field_error(const std::string& where, const std::string& what) {
  return make_error(ErrorKind::invalid_input, "constants library, " + where + ": " + what);
}

Result<double> number_field(const json& j, const char* key, const std::string& where,
                            std::optional<double> fallback = std::nullopt) {
  const auto it = j.find(key);
  if (it == j.end()) {
    if (fallback)
      return *fallback;
    return field_error(where, std::string(key) + " is missing");
  }
  if (!it->is_number())
    return field_error(where, std::string(key) + " is not a number");
  const double v = it->get<double>();
  if (!std::isfinite(v))
    return field_error(where, std::string(key) + " is not finite");
  return v;
}

Result<int> int_field(const json& j, const char* key, const std::string& where,
                      std::optional<int> fallback = std::nullopt) {
  const auto it = j.find(key);
  if (it == j.end()) {
    if (fallback)
      return *fallback;
    return field_error(where, std::string(key) + " is missing");
  }
  if (!it->is_number_integer())
    return field_error(where, std::string(key) + " is not an integer");
  return it->get<int>();
}

Result<std::string> string_field(const json& j, const char* key, const std::string& where,
                                 std::optional<std::string> fallback = std::nullopt) {
  const auto it = j.find(key);
  if (it == j.end()) {
    if (fallback)
      return *fallback;
    return field_error(where, std::string(key) + " is missing");
  }
  if (!it->is_string())
    return field_error(where, std::string(key) + " is not a string");
  return it->get<std::string>();
}

Result<ConstantRecord> parse_record(const json& j, const std::string& where,
                                    const std::set<std::string>& source_keys) {
  if (!j.is_object())
    return field_error(where, "is not an object");
  ConstantRecord r;
  auto beta = number_field(j, "log10_beta", where);
  if (!beta)
    return beta.error();
  r.log10_beta = *beta;
  auto t = number_field(j, "temperature_c", where);
  if (!t)
    return t.error();
  r.temperature_c = *t;
  auto i = number_field(j, "ionic_strength_mol_per_l", where);
  if (!i)
    return i.error();
  if (*i < 0.0)
    return field_error(where, "ionic_strength_mol_per_l is negative");
  r.ionic_strength_mol_per_l = *i;
  auto s = string_field(j, "source", where);
  if (!s)
    return s.error();
  if (!source_keys.count(*s)) {
    return field_error(where, "source '" + *s + "' is not a key of 'sources'");
  }
  r.source = *s;
  const auto mem = j.find("recalled_from_memory");
  if (mem == j.end() || !mem->is_boolean()) {
    return field_error(where, "recalled_from_memory (true or false) is missing");
  }
  r.recalled_from_memory = mem->get<bool>();
  auto note = string_field(j, "note", where, std::string());
  if (!note)
    return note.error();
  r.note = *note;
  return r;
}

Result<LigandRole> parse_role(const std::string& text, const std::string& where) {
  if (text == "titrant")
    return LigandRole::titrant;
  if (text == "auxiliary")
    return LigandRole::auxiliary;
  if (text == "masking")
    return LigandRole::masking;
  if (text == "indicator")
    return LigandRole::indicator;
  return field_error(where, "role '" + text + "' is not titrant, auxiliary, masking or indicator");
}

std::string count_suffix(int n) {
  return n > 1 ? std::to_string(n) : std::string();
}

}  // namespace

const char* ligand_role_name(LigandRole role) {
  switch (role) {
    case LigandRole::titrant:
      return "titrant";
    case LigandRole::auxiliary:
      return "auxiliary";
    case LigandRole::masking:
      return "masking";
    case LigandRole::indicator:
      return "indicator";
  }
  return "auxiliary";
}

std::string complex_name(std::string_view metal, int metals, std::string_view ligand, int ligands,
                         int protons) {
  std::string name;
  if (!metal.empty()) {
    name += metal;
    name += count_suffix(metals);
  } else if (protons > 0) {
    name += "H";
    name += count_suffix(protons);
  }
  if (!ligand.empty() && ligands > 0) {
    name += "(";
    name += ligand;
    name += ")";
    name += count_suffix(ligands);
  }
  if (!metal.empty() && protons > 0) {
    name += "H";
    name += count_suffix(protons);
  } else if (protons < 0) {
    name += "(OH)";
    name += count_suffix(-protons);
  }
  return name;
}

std::vector<double> LigandEntry::pka_values() const {
  std::vector<double> beta(protonation.size() + 1, std::nan(""));
  beta[0] = 0.0;
  for (const auto& p : protonation) {
    if (p.protons < 1 || p.protons > static_cast<int>(protonation.size()))
      return {};
    beta[static_cast<std::size_t>(p.protons)] = p.value.log10_beta;
  }
  std::vector<double> pka;
  for (std::size_t n = 1; n < beta.size(); ++n) {
    if (std::isnan(beta[n]))
      return {};
    pka.push_back(beta[n] - beta[n - 1]);
  }
  std::sort(pka.begin(), pka.end());
  return pka;
}

const ComplexConstant* LigandEntry::one_to_one(std::string_view metal) const {
  for (const auto& c : complexes) {
    if (c.metal == metal && c.metals == 1 && c.ligands == 1 && c.protons == 0)
      return &c;
  }
  return nullptr;
}

const MetalEntry* ConstantsLibrary::find_metal(std::string_view name) const {
  for (const auto& m : metals) {
    if (m.name == name)
      return &m;
  }
  return nullptr;
}

const LigandEntry* ConstantsLibrary::find_ligand(std::string_view name) const {
  for (const auto& l : ligands) {
    if (l.name == name)
      return &l;
  }
  return nullptr;
}

std::string ConstantsLibrary::citation(std::string_view key) const {
  for (const auto& [k, v] : sources) {
    if (k == key)
      return v;
  }
  return {};
}

Result<ConstantsLibrary> ConstantsLibrary::parse(std::string_view json_text) {
  json root;
  try {
    root = json::parse(json_text.begin(), json_text.end());
  } catch (const json::exception& e) {  // parse_error, or out_of_range for a number too large
    return make_error(ErrorKind::invalid_input,
                      std::string("constants library is not valid JSON: ") + e.what());
  }
  if (!root.is_object())
    return field_error("top level", "is not an object");
  ConstantsLibrary lib;
  std::set<std::string> keys;
  const auto src = root.find("sources");
  if (src == root.end() || !src->is_object()) {
    return field_error("top level", "'sources' (an object of key: citation) is missing");
  }
  for (const auto& [k, v] : src->items()) {
    if (!v.is_string())
      return field_error("sources." + k, "is not a string");
    lib.sources.emplace_back(k, v.get<std::string>());
    keys.insert(k);
  }
  const auto water = root.find("water");
  if (water == root.end())
    return field_error("top level", "'water' (log10 Kw) is missing");
  auto w = parse_record(*water, "water", keys);
  if (!w)
    return w.error();
  lib.water = *w;

  const auto metals = root.find("metals");
  if (metals == root.end() || !metals->is_array()) {
    return field_error("top level", "'metals' (an array) is missing");
  }
  std::set<std::string> metal_names;
  for (std::size_t i = 0; i < metals->size(); ++i) {
    const json& m = (*metals)[i];
    std::string where = "metals[" + std::to_string(i) + "]";
    if (!m.is_object())
      return field_error(where, "is not an object");
    MetalEntry entry;
    auto name = string_field(m, "name", where);
    if (!name)
      return name.error();
    entry.name = *name;
    where += " '" + entry.name + "'";
    if (!metal_names.insert(entry.name).second)
      return field_error(where, "name is repeated");
    auto charge = int_field(m, "charge", where);
    if (!charge)
      return charge.error();
    if (*charge < 1 || *charge > 4)
      return field_error(where, "charge must be 1..4");
    entry.charge = *charge;
    if (const auto h = m.find("hydrolysis"); h != m.end()) {
      if (!h->is_array())
        return field_error(where, "hydrolysis is not an array");
      for (std::size_t k = 0; k < h->size(); ++k) {
        const std::string w2 = where + " hydrolysis[" + std::to_string(k) + "]";
        const json& e = (*h)[k];
        auto rec = parse_record(e, w2, keys);
        if (!rec)
          return rec.error();
        auto mm = int_field(e, "metals", w2, 1);
        if (!mm)
          return mm.error();
        auto oh = int_field(e, "hydroxide", w2);
        if (!oh)
          return oh.error();
        if (*mm < 1 || *oh < 1)
          return field_error(w2, "metals and hydroxide must be >= 1");
        entry.hydrolysis.push_back({*mm, *oh, *rec});
      }
    }
    lib.metals.push_back(std::move(entry));
  }

  const auto ligands = root.find("ligands");
  if (ligands == root.end() || !ligands->is_array()) {
    return field_error("top level", "'ligands' (an array) is missing");
  }
  std::set<std::string> ligand_names;
  for (std::size_t i = 0; i < ligands->size(); ++i) {
    const json& l = (*ligands)[i];
    std::string where = "ligands[" + std::to_string(i) + "]";
    if (!l.is_object())
      return field_error(where, "is not an object");
    LigandEntry entry;
    auto name = string_field(l, "name", where);
    if (!name)
      return name.error();
    entry.name = *name;
    where += " '" + entry.name + "'";
    if (!ligand_names.insert(entry.name).second || metal_names.count(entry.name)) {
      return field_error(where, "name is repeated (or is also a metal's name)");
    }
    auto charge = int_field(l, "charge", where);
    if (!charge)
      return charge.error();
    if (*charge > 0 || *charge < -8)
      return field_error(where, "charge must be 0..-8");
    entry.charge = *charge;
    auto role = string_field(l, "role", where);
    if (!role)
      return role.error();
    auto r = parse_role(*role, where);
    if (!r)
      return r.error();
    entry.role = *r;
    auto desc = string_field(l, "description", where, std::string());
    if (!desc)
      return desc.error();
    entry.description = *desc;
    if (const auto p = l.find("protonation"); p != l.end()) {
      if (!p->is_array())
        return field_error(where, "protonation is not an array");
      for (std::size_t k = 0; k < p->size(); ++k) {
        const std::string w2 = where + " protonation[" + std::to_string(k) + "]";
        auto rec = parse_record((*p)[k], w2, keys);
        if (!rec)
          return rec.error();
        auto n = int_field((*p)[k], "protons", w2);
        if (!n)
          return n.error();
        if (*n < 1)
          return field_error(w2, "protons must be >= 1");
        entry.protonation.push_back({*n, *rec});
      }
    }
    if (const auto c = l.find("complexes"); c != l.end()) {
      if (!c->is_array())
        return field_error(where, "complexes is not an array");
      for (std::size_t k = 0; k < c->size(); ++k) {
        const std::string w2 = where + " complexes[" + std::to_string(k) + "]";
        const json& e = (*c)[k];
        auto rec = parse_record(e, w2, keys);
        if (!rec)
          return rec.error();
        ComplexConstant cc;
        auto metal = string_field(e, "metal", w2);
        if (!metal)
          return metal.error();
        if (!metal_names.count(*metal)) {
          return field_error(w2, "metal '" + *metal + "' is not in 'metals'");
        }
        cc.metal = *metal;
        auto mm = int_field(e, "metals", w2, 1);
        auto ll = int_field(e, "ligands", w2, 1);
        auto pp = int_field(e, "protons", w2, 0);
        if (!mm)
          return mm.error();
        if (!ll)
          return ll.error();
        if (!pp)
          return pp.error();
        if (*mm < 1 || *ll < 1)
          return field_error(w2, "metals and ligands must be >= 1");
        cc.metals = *mm;
        cc.ligands = *ll;
        cc.protons = *pp;
        cc.value = *rec;
        entry.complexes.push_back(std::move(cc));
      }
    }
    if (const auto a = l.find("absorptivities"); a != l.end()) {
      if (!a->is_array())
        return field_error(where, "absorptivities is not an array");
      for (std::size_t k = 0; k < a->size(); ++k) {
        const std::string w2 = where + " absorptivities[" + std::to_string(k) + "]";
        const json& e = (*a)[k];
        if (!e.is_object())
          return field_error(w2, "is not an object");
        Absorptivity ab;
        const auto form = e.find("form");
        if (form == e.end() || !form->is_object())
          return field_error(w2, "form is missing");
        auto fm = string_field(*form, "metal", w2 + " form", std::string());
        auto fp = int_field(*form, "protons", w2 + " form", 0);
        if (!fm)
          return fm.error();
        if (!fp)
          return fp.error();
        ab.form = {*fm, *fp};
        auto wl = number_field(e, "wavelength_nm", w2);
        auto eps = number_field(e, "molar_absorptivity_l_per_mol_cm", w2);
        if (!wl)
          return wl.error();
        if (!eps)
          return eps.error();
        if (*wl <= 0.0 || *eps < 0.0) {
          return field_error(w2, "wavelength must be > 0 and absorptivity >= 0");
        }
        ab.wavelength_nm = *wl;
        ab.molar_absorptivity_l_per_mol_cm = *eps;
        auto s = string_field(e, "source", w2);
        if (!s)
          return s.error();
        if (!keys.count(*s))
          return field_error(w2, "source '" + *s + "' is not a key of 'sources'");
        ab.source = *s;
        const auto mem = e.find("recalled_from_memory");
        if (mem == e.end() || !mem->is_boolean()) {
          return field_error(w2, "recalled_from_memory (true or false) is missing");
        }
        ab.recalled_from_memory = mem->get<bool>();
        auto note = string_field(e, "note", w2, std::string());
        if (!note)
          return note.error();
        ab.note = *note;
        entry.absorptivities.push_back(std::move(ab));
      }
    }
    lib.ligands.push_back(std::move(entry));
  }
  return lib;
}

Result<ConstantsLibrary> builtin_constants_library() {
  return ConstantsLibrary::parse(builtin_constants_json());
}

Result<ChemicalSystem> build_system(const ConstantsLibrary& library, const SystemRecipe& recipe) {
  ChemicalSystem system;
  system.components.push_back({"H+", 1});
  system.proton = 0;
  std::vector<const MetalEntry*> metals;
  std::vector<const LigandEntry*> ligands;
  for (const auto& name : recipe.metals) {
    const MetalEntry* m = library.find_metal(name);
    if (!m) {
      return make_error(ErrorKind::invalid_input,
                        "metal '" + name + "' is not in the constants library");
    }
    if (std::find(metals.begin(), metals.end(), m) != metals.end()) {
      return make_error(ErrorKind::invalid_input, "metal '" + name + "' is listed twice");
    }
    metals.push_back(m);
    system.components.push_back({m->name, m->charge});
  }
  for (const auto& name : recipe.ligands) {
    const LigandEntry* l = library.find_ligand(name);
    if (!l) {
      return make_error(ErrorKind::invalid_input,
                        "ligand '" + name + "' is not in the constants library");
    }
    if (std::find(ligands.begin(), ligands.end(), l) != ligands.end()) {
      return make_error(ErrorKind::invalid_input, "ligand '" + name + "' is listed twice");
    }
    ligands.push_back(l);
    system.components.push_back({l->name, l->charge});
  }
  const std::size_t nc = system.components.size();
  auto add = [&](std::string name, std::vector<int> st, const ConstantRecord& r) {
    system.species.push_back(
        {std::move(name), std::move(st), r.log10_beta, r.ionic_strength_mol_per_l});
  };
  {
    std::vector<int> st(nc, 0);
    st[0] = -1;
    add("OH-", st, library.water);
  }
  for (std::size_t li = 0; li < ligands.size(); ++li) {
    const std::size_t lc = 1 + metals.size() + li;
    for (const auto& p : ligands[li]->protonation) {
      std::vector<int> st(nc, 0);
      st[0] = p.protons;
      st[lc] = 1;
      add(complex_name("", 1, ligands[li]->name, 1, p.protons), st, p.value);
    }
  }
  for (std::size_t mi = 0; mi < metals.size(); ++mi) {
    if (!recipe.hydrolysis)
      break;
    for (const auto& h : metals[mi]->hydrolysis) {
      std::vector<int> st(nc, 0);
      st[0] = -h.hydroxide;
      st[1 + mi] = h.metals;
      add(complex_name(metals[mi]->name, h.metals, "", 0, -h.hydroxide), st, h.value);
    }
  }
  for (std::size_t li = 0; li < ligands.size(); ++li) {
    const std::size_t lc = 1 + metals.size() + li;
    for (const auto& c : ligands[li]->complexes) {
      for (std::size_t mi = 0; mi < metals.size(); ++mi) {
        if (metals[mi]->name != c.metal)
          continue;
        std::vector<int> st(nc, 0);
        st[0] = c.protons;
        st[1 + mi] = c.metals;
        st[lc] = c.ligands;
        add(complex_name(c.metal, c.metals, ligands[li]->name, c.ligands, c.protons), st, c.value);
      }
    }
  }
  if (auto ok = system.validate(); !ok)
    return ok.error();
  return system;
}

}  // namespace veq::chemistry
