#include "chemistry/prediction.hpp"

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <limits>
#include <numeric>
#include <sstream>

namespace veq::chemistry {

namespace {

using nlohmann::json;

// R ln10 / F in mV per kelvin: the Nernst slope is this times T for z = 1
// (R = 8.314462618 J/(mol K), F = 96485.33212 C/mol, CODATA 2018).
constexpr double kNernstMvPerKelvin = 1000.0 * 8.314462618 * kLn10 / 96485.33212;

Error input_error(const std::string& what) {
  return make_error(ErrorKind::invalid_input, what);
}

// Absorptivity of one form at a wavelength by linear interpolation between the
// listed wavelengths; nullopt when the form has data but not around it.
std::optional<double> absorptivity_at(const LigandEntry& indicator, const AbsorbingForm& form,
                                      double wavelength_nm, bool& listed) {
  std::vector<std::pair<double, double>> points;
  for (const auto& a : indicator.absorptivities) {
    if (a.form.metal == form.metal && a.form.protons == form.protons) {
      points.emplace_back(a.wavelength_nm, a.molar_absorptivity_l_per_mol_cm);
    }
  }
  listed = !points.empty();
  if (points.empty())
    return 0.0;  // not listed: taken as not absorbing
  std::sort(points.begin(), points.end());
  for (std::size_t k = 0; k < points.size(); ++k) {
    if (std::abs(points[k].first - wavelength_nm) < 0.5)
      return points[k].second;
    if (k + 1 < points.size() && points[k].first < wavelength_nm &&
        wavelength_nm < points[k + 1].first) {
      const double w = (wavelength_nm - points[k].first) / (points[k + 1].first - points[k].first);
      return points[k].second + w * (points[k + 1].second - points[k].second);
    }
  }
  return std::nullopt;
}

std::string fmt(double v, const char* format = "%.3g") {
  char buffer[48];
  std::snprintf(buffer, sizeof buffer, format, v);
  return buffer;
}

}  // namespace

// Builds the model; a struct so that it may use TitrationModel's private parts.
struct ModelBuilder {
  static Result<TitrationModel> build(const ConstantsLibrary& library,
                                      const SampleComposition& sample, SolverOptions options) {
    if (!(sample.sample_volume_ml > 0.0))
      return input_error("sample volume must be > 0 mL");
    if (sample.metals.empty())
      return input_error("the sample has no metal");
    if (!(sample.titrant.conc_mol_per_l > 0.0)) {
      return input_error("titrant concentration must be > 0 mol/L");
    }
    const LigandEntry* titrant = library.find_ligand(sample.titrant.name);
    if (!titrant) {
      return input_error("titrant '" + sample.titrant.name + "' is not in the constants library");
    }
    SystemRecipe recipe;
    for (const auto& m : sample.metals) {
      if (!(m.conc_mol_per_l > 0.0)) {
        return input_error("metal '" + m.name + "' needs a concentration > 0 mol/L");
      }
      if (!titrant->one_to_one(m.name)) {
        return input_error("the constants library has no 1:1 constant of '" + m.name +
                           "' with the titrant '" + titrant->name + "'; add one to predict");
      }
      recipe.metals.push_back(m.name);
    }
    recipe.ligands.push_back(titrant->name);
    // Ligands merged by name (a buffer may be given as base and acid form).
    SampleComposition merged = sample;
    merged.ligands.clear();
    std::vector<double> ligand_protons;
    for (const auto& l : sample.ligands) {
      if (l.name == titrant->name) {
        return input_error("ligand '" + l.name + "' is also the titrant");
      }
      const LigandEntry* entry = library.find_ligand(l.name);
      if (!entry)
        return input_error("ligand '" + l.name + "' is not in the constants library");
      auto it = std::find_if(merged.ligands.begin(), merged.ligands.end(),
                             [&](const SampleLigand& x) { return x.name == l.name; });
      if (it == merged.ligands.end()) {
        merged.ligands.push_back(l);
        ligand_protons.push_back(l.total_mol_per_l * l.protons_per_formula);
        recipe.ligands.push_back(l.name);
      } else {
        it->total_mol_per_l += l.total_mol_per_l;
        ligand_protons[static_cast<std::size_t>(it - merged.ligands.begin())] +=
            l.total_mol_per_l * l.protons_per_formula;
      }
    }
    // Store the proton excess of each merged ligand as total * protons_per_formula.
    for (std::size_t k = 0; k < merged.ligands.size(); ++k) {
      merged.ligands[k].protons_per_formula =
          merged.ligands[k].total_mol_per_l > 0.0
              ? ligand_protons[k] / merged.ligands[k].total_mol_per_l
              : 0.0;
    }
    const LigandEntry* indicator = nullptr;
    if (sample.indicator) {
      indicator = library.find_ligand(sample.indicator->name);
      if (!indicator) {
        return input_error("indicator '" + sample.indicator->name +
                           "' is not in the constants library");
      }
      if (indicator->role != LigandRole::indicator) {
        return input_error("'" + indicator->name +
                           "' is not an indicator in the constants library");
      }
      if (std::find(recipe.ligands.begin(), recipe.ligands.end(), indicator->name) !=
          recipe.ligands.end()) {
        return input_error("indicator '" + indicator->name + "' is also listed as a ligand");
      }
      recipe.ligands.push_back(indicator->name);
    }
    auto system = build_system(library, recipe);
    if (!system)
      return system.error();
    auto solver = EquilibriumSolver::create(*system, options);
    if (!solver)
      return solver.error();
    TitrationModel model(merged, std::move(*solver));
    const auto nm = sample.metals.size();
    model.titrant_ = static_cast<int>(1 + nm);
    for (std::size_t k = 0; k < merged.ligands.size(); ++k)
      model.ligand_components_.push_back(2 + nm + k);
    model.indicator_ = indicator ? static_cast<int>(2 + nm + merged.ligands.size()) : -1;
    // Signal metal.
    if (!sample.signal.metal.empty()) {
      auto it = std::find_if(sample.metals.begin(), sample.metals.end(),
                             [&](const SampleMetal& m) { return m.name == sample.signal.metal; });
      if (it == sample.metals.end()) {
        return input_error("signal metal '" + sample.signal.metal + "' is not in the sample");
      }
      model.signal_metal_ = static_cast<std::size_t>(it - sample.metals.begin());
    }
    model.metal_charge_ = library.find_metal(sample.metals[model.signal_metal_].name)->charge;
    if (sample.signal.kind == SignalKind::absorbance) {
      if (!indicator)
        return input_error("an absorbance signal needs an indicator in the sample");
      const double wl = sample.signal.wavelength_nm;
      bool any = false;
      const auto& sys = model.system();
      const auto ic = static_cast<std::size_t>(model.indicator_);
      bool listed = false;
      auto free_eps = absorptivity_at(*indicator, {"", 0}, wl, listed);
      if (!free_eps) {
        return input_error("no absorptivity of the free indicator near " + fmt(wl) + " nm");
      }
      any = any || listed;
      model.absorptivity_free_indicator_ = *free_eps;
      model.absorptivity_per_species_.assign(sys.species.size(), 0.0);
      for (std::size_t i = 0; i < sys.species.size(); ++i) {
        const auto& st = sys.species[i].stoichiometry;
        if (st[ic] != 1)
          continue;
        AbsorbingForm form;
        form.protons = st[0];
        int metals = 0;
        for (std::size_t m = 0; m < nm; ++m) {
          if (st[1 + m] != 0) {
            form.metal = sample.metals[m].name;
            metals += st[1 + m];
          }
        }
        if (metals > 1)
          continue;
        if (!form.metal.empty())
          form.protons = 0;
        auto eps = absorptivity_at(*indicator, form, wl, listed);
        if (!eps) {
          return input_error("the absorptivities of '" + sys.species[i].name + "' do not cover " +
                             fmt(wl) + " nm");
        }
        any = any || listed;
        model.absorptivity_per_species_[i] = *eps;
      }
      if (!any) {
        return input_error("the constants library lists no absorptivity of '" + indicator->name +
                           "' at " + fmt(wl) + " nm");
      }
    }
    // The closed form applies when nothing but the metal, the titrant and H+ at a
    // fixed pH is present and every metal-titrant species is 1:1.
    if (nm == 1 && sample.ph && merged.ligands.empty() && !indicator &&
        !sample.ionic_strength_mol_per_l) {
      const auto& sys = model.system();
      const double ph = *sample.ph;
      bool exact = true;
      std::vector<double> metal_terms = {0.0}, titrant_terms = {0.0}, complex_terms;
      for (const auto& sp : sys.species) {
        const auto& st = sp.stoichiometry;
        const double term = sp.log10_beta - st[0] * ph;
        if (st[1] != 0 && st[2] != 0) {
          if (st[1] != 1 || st[2] != 1)
            exact = false;
          complex_terms.push_back(term);
        } else if (st[1] != 0) {
          if (st[1] != 1)
            exact = false;
          metal_terms.push_back(term);
        } else if (st[2] != 0) {
          titrant_terms.push_back(term);
        }
      }
      if (exact && !complex_terms.empty()) {
        auto log_sum = [](const std::vector<double>& t) {
          const double top = *std::max_element(t.begin(), t.end());
          double s = 0.0;
          for (double v : t)
            s += std::pow(10.0, v - top);
          return top + std::log10(s);
        };
        const double log_alpha_m = log_sum(metal_terms);
        OneToOneTitration t;
        t.metal_conc_mol_per_l = sample.metals[0].conc_mol_per_l;
        t.sample_volume_ml = sample.sample_volume_ml;
        t.titrant_conc_mol_per_l = sample.titrant.conc_mol_per_l;
        t.conditional_constant =
            std::pow(10.0, log_sum(complex_terms) - log_alpha_m - log_sum(titrant_terms));
        if (std::isfinite(t.conditional_constant) && t.conditional_constant > 0.0) {
          model.closed_form_ = t;
          model.closed_form_log10_alpha_metal_ = log_alpha_m;
        }
      }
    }
    return model;
  }
};

TitrationModel::TitrationModel(SampleComposition sample, EquilibriumSolver solver)
    : sample_(std::move(sample)), solver_(std::move(solver)) {}

Result<TitrationModel> TitrationModel::create(const ConstantsLibrary& library,
                                              const SampleComposition& sample,
                                              SolverOptions options) {
  return ModelBuilder::build(library, sample, options);
}

Conditions TitrationModel::conditions_at(double added_ml) const {
  Conditions c;
  conditions_at(added_ml, c);
  return c;
}

void TitrationModel::conditions_at(double added_ml, Conditions& c) const {
  const double total_ml = sample_.sample_volume_ml + added_ml;
  const double sample_part = sample_.sample_volume_ml / total_ml;
  const double titrant_part = added_ml / total_ml;
  const auto& sys = system();
  c.total_mol_per_l.assign(sys.components.size(), 0.0);
  double protons = sample_.strong_acid_mol_per_l * sample_part;
  for (std::size_t m = 0; m < sample_.metals.size(); ++m) {
    c.total_mol_per_l[1 + m] = sample_.metals[m].conc_mol_per_l * sample_part;
  }
  c.total_mol_per_l[static_cast<std::size_t>(titrant_)] =
      sample_.titrant.conc_mol_per_l * titrant_part;
  protons += sample_.titrant.protons_per_formula * sample_.titrant.conc_mol_per_l * titrant_part;
  for (std::size_t k = 0; k < sample_.ligands.size(); ++k) {
    const auto& l = sample_.ligands[k];
    c.total_mol_per_l[ligand_components_[k]] = l.total_mol_per_l * sample_part;
    protons += l.protons_per_formula * l.total_mol_per_l * sample_part;
  }
  if (indicator_ >= 0) {
    c.total_mol_per_l[static_cast<std::size_t>(indicator_)] =
        sample_.indicator->conc_mol_per_l * sample_part;
  }
  c.total_mol_per_l[0] = protons;
  c.ph = sample_.ph;
  c.ionic_strength_mol_per_l = sample_.ionic_strength_mol_per_l;
}

Result<void> TitrationModel::solve_at(double added_ml, Speciation& out, const Speciation* start) {
  if (!(added_ml >= 0.0) || !std::isfinite(added_ml)) {
    return input_error("added titrant volume must be a finite number >= 0 mL");
  }
  conditions_at(added_ml, work_conditions_);
  return start ? solver_.solve_from(work_conditions_, *start, out)
               : solver_.solve(work_conditions_, out);
}

double TitrationModel::p_metal(const Speciation& s, std::size_t i) const {
  return -s.log10_free[1 + i];
}

double TitrationModel::signal(const Speciation& s) const {
  switch (sample_.signal.kind) {
    case SignalKind::p_metal:
      return p_metal(s, signal_metal_);
    case SignalKind::potential: {
      double log_activity = s.log10_free[1 + signal_metal_];
      if (sample_.ionic_strength_mol_per_l) {
        log_activity +=
            davies_log10_activity_coefficient(metal_charge_, *sample_.ionic_strength_mol_per_l);
      }
      const double slope_mv = kNernstMvPerKelvin * (sample_.signal.temperature_c + 273.15) *
                              sample_.signal.slope_percent / 100.0 / metal_charge_;
      return sample_.signal.standard_potential_mv + slope_mv * log_activity;
    }
    case SignalKind::absorbance: {
      double a =
          absorptivity_free_indicator_ * s.free_mol_per_l[static_cast<std::size_t>(indicator_)];
      for (std::size_t i = 0; i < absorptivity_per_species_.size(); ++i) {
        a += absorptivity_per_species_[i] * s.species_mol_per_l[i];
      }
      return a * sample_.signal.path_length_cm;
    }
  }
  return std::nan("");
}

double TitrationModel::indicator_bound_fraction(const Speciation& s) const {
  if (indicator_ < 0)
    return std::nan("");
  const auto& sys = system();
  const auto ic = static_cast<std::size_t>(indicator_);
  double total = s.free_mol_per_l[ic];
  double bound = 0.0;
  for (std::size_t i = 0; i < sys.species.size(); ++i) {
    const auto& st = sys.species[i].stoichiometry;
    if (st[ic] == 0)
      continue;
    const double amount = st[ic] * s.species_mol_per_l[i];
    total += amount;
    bool has_metal = false;
    for (std::size_t m = 0; m < sample_.metals.size(); ++m)
      has_metal = has_metal || st[1 + m] != 0;
    if (has_metal)
      bound += amount;
  }
  return total > 0.0 ? bound / total : 0.0;
}

double TitrationModel::metal_volume_ml(std::size_t i) const {
  return sample_.metals[i].conc_mol_per_l * sample_.sample_volume_ml /
         sample_.titrant.conc_mol_per_l;
}

namespace {

// pM of metal i at a volume, through the closed form when it applies.
struct Evaluator {
  TitrationModel& model;
  bool use_closed_form;
  Speciation work;
  Speciation previous;
  bool have_previous = false;

  Result<void> at(double v) {
    auto r = model.solve_at(v, work, have_previous ? &previous : nullptr);
    if (!r)
      return r;
    previous = work;
    have_previous = true;
    return {};
  }
  Result<double> p_metal(double v, std::size_t i) {
    if (use_closed_form) {
      return p_metal_closed(v);
    }
    auto r = at(v);
    if (!r)
      return r.error();
    return model.p_metal(work, i);
  }
  double p_metal_closed(double v) const {
    return -std::log10(free_metal_mol_per_l(*model.closed_form(), v)) +
           model.closed_form_log10_alpha_metal();
  }
  Result<double> signal(double v) {
    if (use_closed_form && model.sample().signal.kind == SignalKind::p_metal)
      return p_metal_closed(v);
    auto r = at(v);
    if (!r)
      return r.error();
    return model.signal(work);
  }
};

std::vector<std::pair<double, double>> windows(const std::vector<double>& ph,
                                               const std::vector<bool>& ok) {
  std::vector<std::pair<double, double>> out;
  for (std::size_t k = 0; k < ph.size(); ++k) {
    if (!ok[k])
      continue;
    if (k > 0 && ok[k - 1] && !out.empty()) {
      out.back().second = ph[k];
    } else {
      out.emplace_back(ph[k], ph[k]);
    }
  }
  return out;
}

struct MetalOrder {
  std::vector<std::size_t> order;             // metals, strongest log10(C K') first
  std::vector<double> equivalence_volume_ml;  // cumulative, per position in order
};

}  // namespace

Result<Feasibility> assess_feasibility(const ConstantsLibrary& library,
                                       const SampleComposition& sample,
                                       const PredictionOptions& options) {
  auto model = TitrationModel::create(library, sample, options.solver);
  if (!model)
    return model.error();
  const auto& merged = model->sample();
  Feasibility f;
  f.criterion = "sharp when log10(C K') >= " + fmt(options.sharpness_log10_ck) +
                " (C: metal concentration at its equivalence point, K': conditional constant); "
                "two metals in sequence when their log10(C K') differ by >= " +
                fmt(options.separation_log10_ck) +
                ". Common practice: both follow from Ringbom's titration-error formula "
                "(A. Ringbom, Complexation in Analytical Chemistry, 1963) for 0.1 % error with "
                "the endpoint located to +-" +
                fmt(options.endpoint_uncertainty_p_metal) + " pM.";
  std::vector<LigandTotal> ligands;
  for (const auto& l : merged.ligands)
    ligands.push_back({l.name, l.total_mol_per_l});
  const std::size_t nm = merged.metals.size();
  const double total_volume_ml = [&] {
    double v = 0.0;
    for (std::size_t i = 0; i < nm; ++i)
      v += model->metal_volume_ml(i);
    return v;
  }();
  // Each metal at its own equivalence point; the sample's pH or, with a proton
  // balance, the pH the model finds there.
  std::vector<double> ph_at(nm), conc_at(nm);
  for (std::size_t i = 0; i < nm; ++i) {
    const double v = total_volume_ml;
    conc_at[i] =
        merged.metals[i].conc_mol_per_l * merged.sample_volume_ml / (merged.sample_volume_ml + v);
    if (merged.ph) {
      ph_at[i] = *merged.ph;
    } else {
      Speciation s;
      auto r = model->solve_at(v, s);
      if (!r)
        return r.error();
      ph_at[i] = s.ph;
    }
  }
  auto log_ck = [&](std::size_t i, double ph,
                    const std::vector<LigandTotal>& with) -> Result<double> {
    auto k = conditional_constant(library, merged.metals[i].name, merged.titrant.name, ph, with);
    if (!k)
      return k.error();
    return k->log10_conditional + std::log10(conc_at[i]);
  };
  std::vector<double> scan;
  for (double ph = 0.0; ph <= 14.0 + 1e-9; ph += options.ph_step)
    scan.push_back(std::round(ph * 1000.0) / 1000.0);
  std::vector<std::vector<double>> scan_ck(nm, std::vector<double>(scan.size()));
  for (std::size_t i = 0; i < nm; ++i) {
    MetalFeasibility mf;
    mf.metal = merged.metals[i].name;
    auto k = conditional_constant(library, mf.metal, merged.titrant.name, ph_at[i], ligands);
    if (!k)
      return k.error();
    mf.conditional = *k;
    mf.conc_at_equivalence_mol_per_l = conc_at[i];
    mf.log10_ck = k->log10_conditional + std::log10(conc_at[i]);
    mf.sharp = mf.log10_ck >= options.sharpness_log10_ck;
    const double d = options.endpoint_uncertainty_p_metal;
    mf.estimated_error_percent =
        (std::pow(10.0, d) - std::pow(10.0, -d)) / std::sqrt(std::pow(10.0, mf.log10_ck)) * 100.0;
    std::vector<bool> ok(scan.size());
    for (std::size_t p = 0; p < scan.size(); ++p) {
      auto v = log_ck(i, scan[p], ligands);
      if (!v)
        return v.error();
      scan_ck[i][p] = *v;
      ok[p] = *v >= options.sharpness_log10_ck;
    }
    mf.ph_windows = windows(scan, ok);
    f.metals.push_back(std::move(mf));
  }
  for (std::size_t a = 0; a < nm; ++a) {
    for (std::size_t b = a + 1; b < nm; ++b) {
      std::size_t hi = a, lo = b;
      if (f.metals[b].log10_ck > f.metals[a].log10_ck)
        std::swap(hi, lo);
      PairFeasibility pf;
      pf.first = f.metals[hi].metal;
      pf.second = f.metals[lo].metal;
      pf.delta_log10_ck = f.metals[hi].log10_ck - f.metals[lo].log10_ck;
      pf.in_sequence = f.metals[hi].sharp && f.metals[lo].sharp &&
                       pf.delta_log10_ck >= options.separation_log10_ck;
      std::vector<bool> ok(scan.size());
      for (std::size_t p = 0; p < scan.size(); ++p) {
        ok[p] = scan_ck[hi][p] >= options.sharpness_log10_ck &&
                scan_ck[hi][p] - scan_ck[lo][p] >= options.separation_log10_ck;
      }
      pf.selective_ph_windows = windows(scan, ok);
      for (const auto& agent : library.ligands) {
        if (agent.role != LigandRole::masking)
          continue;
        if (std::any_of(ligands.begin(), ligands.end(),
                        [&](const LigandTotal& l) { return l.ligand == agent.name; }))
          continue;
        auto with = ligands;
        with.push_back({agent.name, options.masking_total_mol_per_l});
        for (auto [want, other] : {std::pair{a, b}, std::pair{b, a}}) {
          auto cw = log_ck(want, ph_at[want], with);
          auto co = log_ck(other, ph_at[other], with);
          if (!cw)
            return cw.error();
          if (!co)
            return co.error();
          if (*cw >= options.sharpness_log10_ck && *cw - *co >= options.separation_log10_ck) {
            pf.masking.emplace_back(agent.name, merged.metals[want].name);
          }
        }
      }
      if (pf.in_sequence) {
        pf.verdict = pf.first + " and then " + pf.second +
                     " can be titrated one after the other at pH " + fmt(ph_at[hi], "%.1f") +
                     " (two breaks).";
      } else if (f.metals[hi].sharp && f.metals[lo].sharp) {
        pf.verdict = pf.first + " and " + pf.second +
                     " are titrated together (one break for the sum): "
                     "log10(C K') differ by only " +
                     fmt(pf.delta_log10_ck, "%.1f") + ".";
      } else if (f.metals[hi].sharp) {
        pf.verdict = pf.second + " gives no sharp break at this pH; " + pf.first +
                     (pf.delta_log10_ck >= options.separation_log10_ck ? " can be titrated alone."
                                                                       : " is disturbed by it.");
      } else {
        pf.verdict = "neither metal gives a sharp break at this pH.";
      }
      if (!pf.in_sequence) {
        if (!pf.masking.empty()) {
          pf.verdict += " Masking helps:";
          for (const auto& [agent, metal] : pf.masking)
            pf.verdict += " " + agent + " (then titrate " + metal + ");";
          pf.verdict.pop_back();
          pf.verdict += ".";
        } else if (!pf.selective_ph_windows.empty()) {
          pf.verdict += " " + pf.first + " alone can be titrated at pH " +
                        fmt(pf.selective_ph_windows.front().first, "%.1f") + "-" +
                        fmt(pf.selective_ph_windows.front().second, "%.1f") + ".";
        } else {
          pf.verdict += " No masking agent of the library separates them.";
        }
      }
      f.pairs.push_back(std::move(pf));
    }
  }
  return f;
}

Result<Prediction> predict(const ConstantsLibrary& library, const SampleComposition& sample,
                           const PredictionOptions& options) {
  auto created = TitrationModel::create(library, sample, options.solver);
  if (!created)
    return created.error();
  TitrationModel& model = *created;
  auto feasibility = assess_feasibility(library, sample, options);
  if (!feasibility)
    return feasibility.error();
  Prediction p;
  p.sample = sample;
  p.feasibility = std::move(*feasibility);
  const auto& s = model.sample();
  const std::size_t nm = s.metals.size();
  switch (s.signal.kind) {
    case SignalKind::p_metal:
      p.signal_label = "p" + s.metals[model.signal_metal()].name;
      break;
    case SignalKind::potential:
      p.signal_label = "potential_mv";
      break;
    case SignalKind::absorbance:
      p.signal_label = "absorbance_" + fmt(s.signal.wavelength_nm, "%.0f") + "nm";
      break;
  }
  // Titration order: strongest log10(C K') first.
  std::vector<std::size_t> order(nm);
  std::iota(order.begin(), order.end(), 0);
  std::stable_sort(order.begin(), order.end(), [&](std::size_t a, std::size_t b) {
    return p.feasibility.metals[a].log10_ck > p.feasibility.metals[b].log10_ck;
  });
  std::vector<double> equivalence(nm);
  double cumulative = 0.0;
  for (std::size_t k = 0; k < nm; ++k) {
    cumulative += model.metal_volume_ml(order[k]);
    equivalence[k] = cumulative;
  }
  const double end_ml = s.curve.end_volume_ml > 0.0 ? s.curve.end_volume_ml : 1.5 * cumulative;
  const int n = s.curve.points;
  const bool closed = options.closed_form && model.closed_form().has_value();
  p.closed_form_used = closed && s.signal.kind == SignalKind::p_metal;
  Evaluator ev{model, false, {}, {}, false};
  p.curve.reserve(static_cast<std::size_t>(n));
  for (int k = 0; k < n; ++k) {
    const double v = end_ml * k / (n - 1);
    CurvePoint pt;
    pt.volume_ml = v;
    if (p.closed_form_used) {
      Evaluator cf{model, true, {}, {}, false};
      pt.signal = cf.p_metal_closed(v);
      pt.p_metal = {pt.signal};
      pt.ph = *s.ph;
    } else {
      auto r = ev.at(v);
      if (!r)
        return r.error();
      pt.ph = ev.work.ph;
      pt.signal = model.signal(ev.work);
      for (std::size_t m = 0; m < nm; ++m)
        pt.p_metal.push_back(model.p_metal(ev.work, m));
      pt.indicator_bound_fraction = model.indicator_bound_fraction(ev.work);
    }
    p.curve.push_back(std::move(pt));
  }
  // Breaks: for each equivalence point, that metal's pM from 99 % to 101 % of its
  // step, and the steepest point nearby (a fine local scan, refined by a parabola).
  Evaluator local{model, closed, {}, {}, false};
  for (std::size_t k = 0; k < nm; ++k) {
    const std::size_t metal = order[k];
    const double step = model.metal_volume_ml(metal);
    const double veq = equivalence[k];
    BreakReport b;
    b.metal = s.metals[metal].name;
    b.equivalence_volume_ml = veq;
    auto before = local.p_metal(veq - 0.01 * step, metal);
    auto after = local.p_metal(veq + 0.01 * step, metal);
    auto sig_before = local.signal(veq - 0.01 * step);
    auto sig_after = local.signal(veq + 0.01 * step);
    if (!before)
      return before.error();
    if (!after)
      return after.error();
    if (!sig_before)
      return sig_before.error();
    if (!sig_after)
      return sig_after.error();
    b.p_metal_jump = *after - *before;
    b.signal_jump = *sig_after - *sig_before;
    const int grid = 81;
    const double lo = veq - 0.1 * step, hi = veq + 0.1 * step;
    const double h = (hi - lo) / (grid - 1);
    std::vector<double> pm(grid);
    for (int g = 0; g < grid; ++g) {
      auto v = local.p_metal(lo + g * h, metal);
      if (!v)
        return v.error();
      pm[static_cast<std::size_t>(g)] = *v;
    }
    int best = 1;
    double best_slope = -1.0;
    for (int g = 1; g + 1 < grid; ++g) {
      const double slope =
          std::abs(pm[static_cast<std::size_t>(g + 1)] - pm[static_cast<std::size_t>(g - 1)]) /
          (2.0 * h);
      if (slope > best_slope) {
        best_slope = slope;
        best = g;
      }
    }
    double offset = 0.0;
    if (best > 1 && best + 2 < grid) {
      auto sl = [&](int g) {
        return std::abs(pm[static_cast<std::size_t>(g + 1)] - pm[static_cast<std::size_t>(g - 1)]) /
               (2.0 * h);
      };
      const double y0 = sl(best - 1), y1 = sl(best), y2 = sl(best + 1);
      const double denom = y0 - 2.0 * y1 + y2;
      if (denom < 0.0)
        offset = 0.5 * (y0 - y2) / denom;
    }
    b.inflection_volume_ml = lo + (best + offset) * h;
    b.max_slope_p_metal_per_ml = best_slope;
    p.breaks.push_back(b);
  }
  // Indicator endpoint: half of the indicator bound to metal; bisection over the
  // whole curve range on the (decreasing) bound fraction.
  if (s.indicator) {
    Speciation w;
    auto bound_at = [&](double v) -> Result<double> {
      auto r = model.solve_at(v, w);
      if (!r)
        return r.error();
      return model.indicator_bound_fraction(w);
    };
    auto f0 = bound_at(0.0);
    auto f1 = bound_at(end_ml);
    if (!f0)
      return f0.error();
    if (!f1)
      return f1.error();
    if (*f0 > 0.5 && *f1 < 0.5) {
      double lo = 0.0, hi = end_ml;
      for (int it = 0; it < 60; ++it) {
        const double mid = 0.5 * (lo + hi);
        auto fm = bound_at(mid);
        if (!fm)
          return fm.error();
        (*fm > 0.5 ? lo : hi) = mid;
      }
      IndicatorEndpoint e;
      e.volume_ml = 0.5 * (lo + hi);
      std::size_t nearest = 0;
      for (std::size_t k = 1; k < nm; ++k) {
        if (std::abs(equivalence[k] - e.volume_ml) < std::abs(equivalence[nearest] - e.volume_ml))
          nearest = k;
      }
      e.metal = s.metals[order[nearest]].name;
      e.equivalence_volume_ml = equivalence[nearest];
      e.titration_error_percent =
          (e.volume_ml - e.equivalence_volume_ml) / e.equivalence_volume_ml * 100.0;
      p.indicator = e;
    }
  }
  return p;
}

Result<SpeciationReport> speciate(const ConstantsLibrary& library, const SampleComposition& sample,
                                  double added_ml, const SolverOptions& options) {
  auto model = TitrationModel::create(library, sample, options);
  if (!model)
    return model.error();
  Speciation s;
  if (auto r = model->solve_at(added_ml, s); !r)
    return r.error();
  const auto& sys = model->system();
  const Conditions c = model->conditions_at(added_ml);
  SpeciationReport rep;
  rep.added_ml = added_ml;
  rep.ph = s.ph;
  rep.ionic_strength_mol_per_l = s.ionic_strength_mol_per_l;
  rep.iterations = s.iterations;
  rep.max_relative_residual = s.max_relative_residual;
  for (std::size_t j = 0; j < sys.components.size(); ++j) {
    ComponentSpeciation cs;
    cs.name = sys.components[j].name;
    cs.total_mol_per_l = c.total_mol_per_l[j];
    cs.free_mol_per_l = s.free_mol_per_l[j];
    if (j != 0) {
      const double total = component_sum_mol_per_l(sys, s, static_cast<int>(j));
      if (total > 0.0) {
        cs.fractions.emplace_back(cs.name, s.free_mol_per_l[j] / total);
        for (std::size_t i = 0; i < sys.species.size(); ++i) {
          const int a = sys.species[i].stoichiometry[j];
          if (a > 0)
            cs.fractions.emplace_back(sys.species[i].name, a * s.species_mol_per_l[i] / total);
        }
        std::stable_sort(cs.fractions.begin(), cs.fractions.end(),
                         [](const auto& x, const auto& y) { return x.second > y.second; });
      }
    }
    rep.components.push_back(std::move(cs));
  }
  for (std::size_t i = 0; i < sys.species.size(); ++i) {
    rep.species_mol_per_l.emplace_back(sys.species[i].name, s.species_mol_per_l[i]);
  }
  std::vector<LigandTotal> ligands;
  for (const auto& l : model->sample().ligands) {
    ligands.push_back({l.name, l.total_mol_per_l * sample.sample_volume_ml /
                                   (sample.sample_volume_ml + added_ml)});
  }
  for (const auto& m : sample.metals) {
    auto k = conditional_constant(library, m.name, sample.titrant.name, s.ph, ligands);
    if (!k)
      return k.error();
    rep.conditional.emplace_back(m.name, *k);
  }
  return rep;
}

json to_json(const ConditionalConstant& k) {
  return {{"log10_kf", k.log10_kf},
          {"log10_alpha_titrant", k.log10_alpha_titrant},
          {"log10_alpha_metal", k.log10_alpha_metal},
          {"log10_alpha_auxiliary", k.log10_alpha_auxiliary},
          {"log10_conditional", k.log10_conditional}};
}

namespace {
json windows_json(const std::vector<std::pair<double, double>>& w) {
  json out = json::array();
  for (const auto& [lo, hi] : w)
    out.push_back({{"ph_low", lo}, {"ph_high", hi}});
  return out;
}
}  // namespace

json to_json(const Feasibility& f) {
  json j;
  j["criterion"] = f.criterion;
  j["metals"] = json::array();
  for (const auto& m : f.metals) {
    j["metals"].push_back({{"metal", m.metal},
                           {"conditional_constant", to_json(m.conditional)},
                           {"conc_at_equivalence_mol_per_l", m.conc_at_equivalence_mol_per_l},
                           {"log10_ck", m.log10_ck},
                           {"sharp", m.sharp},
                           {"estimated_error_percent", m.estimated_error_percent},
                           {"ph_windows", windows_json(m.ph_windows)}});
  }
  j["pairs"] = json::array();
  for (const auto& pf : f.pairs) {
    json masking = json::array();
    for (const auto& [agent, metal] : pf.masking)
      masking.push_back({{"agent", agent}, {"titrate", metal}});
    j["pairs"].push_back({{"first", pf.first},
                          {"second", pf.second},
                          {"delta_log10_ck", pf.delta_log10_ck},
                          {"in_sequence", pf.in_sequence},
                          {"selective_ph_windows", windows_json(pf.selective_ph_windows)},
                          {"masking", masking},
                          {"verdict", pf.verdict}});
  }
  return j;
}

json to_json(const Prediction& p) {
  json j;
  j["sample"] = to_json(p.sample);
  j["signal"] = p.signal_label;
  j["closed_form_used"] = p.closed_form_used;
  json curve = json::array();
  for (const auto& pt : p.curve) {
    json row = {
        {"volume_ml", pt.volume_ml}, {"ph", pt.ph}, {"signal", pt.signal}, {"p_metal", pt.p_metal}};
    if (!std::isnan(pt.indicator_bound_fraction))
      row["indicator_bound_fraction"] = pt.indicator_bound_fraction;
    curve.push_back(std::move(row));
  }
  j["curve"] = std::move(curve);
  j["breaks"] = json::array();
  for (const auto& b : p.breaks) {
    j["breaks"].push_back({{"metal", b.metal},
                           {"equivalence_volume_ml", b.equivalence_volume_ml},
                           {"inflection_volume_ml", b.inflection_volume_ml},
                           {"p_metal_jump", b.p_metal_jump},
                           {"signal_jump", b.signal_jump},
                           {"max_slope_p_metal_per_ml", b.max_slope_p_metal_per_ml}});
  }
  if (p.indicator) {
    j["indicator_endpoint"] = {{"volume_ml", p.indicator->volume_ml},
                               {"metal", p.indicator->metal},
                               {"equivalence_volume_ml", p.indicator->equivalence_volume_ml},
                               {"titration_error_percent", p.indicator->titration_error_percent}};
  }
  j["feasibility"] = to_json(p.feasibility);
  return j;
}

json to_json(const SpeciationReport& r) {
  json j;
  j["added_ml"] = r.added_ml;
  j["ph"] = r.ph;
  j["ionic_strength_mol_per_l"] = r.ionic_strength_mol_per_l;
  j["iterations"] = r.iterations;
  j["max_relative_residual"] = r.max_relative_residual;
  j["components"] = json::array();
  for (const auto& c : r.components) {
    json fr = json::array();
    for (const auto& [name, f] : c.fractions)
      fr.push_back({{"form", name}, {"fraction", f}});
    j["components"].push_back({{"name", c.name},
                               {"total_mol_per_l", c.total_mol_per_l},
                               {"free_mol_per_l", c.free_mol_per_l},
                               {"fractions", fr}});
  }
  j["species"] = json::array();
  for (const auto& [name, conc] : r.species_mol_per_l) {
    j["species"].push_back({{"name", name}, {"conc_mol_per_l", conc}});
  }
  j["conditional_constants"] = json::array();
  for (const auto& [metal, k] : r.conditional) {
    json e = to_json(k);
    e["metal"] = metal;
    j["conditional_constants"].push_back(e);
  }
  return j;
}

std::string curve_csv(const Prediction& p) {
  std::ostringstream out;
  out << "volume_ml,ph," << p.signal_label;
  for (const auto& m : p.sample.metals)
    out << ",p" << m.name;
  const bool indicator = p.sample.indicator.has_value() && !p.closed_form_used;
  if (indicator)
    out << ",indicator_bound_fraction";
  out << "\n";
  out.precision(10);
  for (const auto& pt : p.curve) {
    out << pt.volume_ml << "," << pt.ph << "," << pt.signal;
    for (double v : pt.p_metal)
      out << "," << v;
    if (indicator)
      out << "," << pt.indicator_bound_fraction;
    out << "\n";
  }
  return out.str();
}

}  // namespace veq::chemistry
