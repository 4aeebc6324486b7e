#include "simulator/vessel.hpp"

#include <algorithm>
#include <cmath>
#include <utility>

#include "chemistry/conditional.hpp"
#include "chemistry/constants.hpp"
#include "chemistry/ligand.hpp"

namespace veq::simulator {

namespace {

/// The shipped library, parsed once per process: every vessel reads it.
Result<std::shared_ptr<const chemistry::ConstantsLibrary>> shipped_library() {
  static const auto library = chemistry::builtin_constants_library();
  if (!library)
    return library.error();
  static const auto shared = std::make_shared<const chemistry::ConstantsLibrary>(*library);
  return shared;
}

}  // namespace

VesselSpecies vessel_species(const chemistry::OneToOneTitration& t, double titrant_ml) {
  const double volume_ml = t.sample_volume_ml + titrant_ml;
  const double metal_total = t.metal_conc_mol_per_l * t.sample_volume_ml / volume_ml;
  const double titrant_total = t.titrant_conc_mol_per_l * titrant_ml / volume_ml;
  VesselSpecies s;
  s.free_metal_mol_per_l = chemistry::free_metal_mol_per_l(t, titrant_ml);
  s.complex_mol_per_l = std::max(0.0, metal_total - s.free_metal_mol_per_l);
  s.free_titrant_mol_per_l = std::max(0.0, titrant_total - s.complex_mol_per_l);
  return s;
}

chemistry::OneToOneTitration scenario_chemistry(const Scenario& s) {
  chemistry::OneToOneTitration t;
  t.metal_conc_mol_per_l = s.sample.metal_conc_mol_per_l;
  t.sample_volume_ml = s.sample.volume_ml;
  t.titrant_conc_mol_per_l = s.titrant.true_conc_mol_per_l;
  const double alpha_ligand = chemistry::fully_deprotonated_fraction(s.titrant.pka, s.sample.ph);
  t.conditional_constant = chemistry::conditional_formation_constant(
      s.sample.log10_formation_constant, alpha_ligand, s.sample.alpha_metal);
  return t;
}

Result<chemistry::SampleComposition> scenario_composition(const Scenario& scenario) {
  auto sample = chemistry::parse_sample_json(scenario.chemistry.sample_json);
  if (!sample)
    return make_error(ErrorKind::invalid_input, "chemistry: " + sample.error().message);
  // The bottle's truth, not its label, reacts in the vessel.
  sample->titrant.conc_mol_per_l = scenario.titrant.true_conc_mol_per_l;
  if (!scenario.titrant.name.empty() && scenario.titrant.name != sample->titrant.name) {
    return make_error(ErrorKind::invalid_input, "chemistry.titrant.name '" + sample->titrant.name +
                                                    "' differs from titrant.name '" +
                                                    scenario.titrant.name + "'");
  }
  return sample;
}

Result<VesselModel> VesselModel::create(const Scenario& scenario,
                                        std::optional<double> absorbance_wavelength_nm) {
  VesselModel v;
  if (!scenario.chemistry.present) {
    v.one_to_one_ = scenario_chemistry(scenario);
    v.charge_ = scenario.sample.charge;
    v.metal_name_ = scenario.sample.metal;
    v.second_ = scenario.second_titrant;
    v.pka_ = scenario.titrant.pka;
    v.ph0_ = v.ph_ = scenario.sample.ph;
    v.capacity_mol_per_ph_ = scenario.sample.buffer_capacity_mol_per_ph;
    v.log10_kf_ = scenario.sample.log10_formation_constant;
    v.alpha_metal_ = scenario.sample.alpha_metal;
    if (auto r = v.solve(VesselContent{}); !r)
      return r.error();
    return v;
  }
  v.general_ = true;
  auto library = shipped_library();
  if (!library)
    return library.error();
  v.library_ = *library;
  auto sample = scenario_composition(scenario);
  if (!sample)
    return sample.error();
  v.base_ = std::move(*sample);
  v.wavelength_nm_ = absorbance_wavelength_nm;
  for (const auto& m : v.base_.metals) {
    const chemistry::MetalEntry* entry = v.library_->find_metal(m.name);
    if (!entry)
      return make_error(ErrorKind::invalid_input, "chemistry: unknown metal '" + m.name + "'");
    v.charges_.push_back(entry->charge);
  }
  v.blank_metal_ = v.metal_index(scenario.chemistry.blank_metal);
  if (v.blank_metal_ < 0) {
    return make_error(ErrorKind::invalid_input, "chemistry.blank_metal '" +
                                                    scenario.chemistry.blank_metal +
                                                    "' is not a metal of the sample");
  }
  v.capacity_mol_per_ph_ = scenario.sample.buffer_capacity_mol_per_ph;
  if (v.capacity_mol_per_ph_ > 0.0) {
    // Acid and base from the doser move a fixed pH through the buffer
    // capacity, as in the 1:1 model; a pH left to the proton balance
    // follows them by itself, so a capacity there would count them twice.
    if (!v.base_.ph) {
      return make_error(ErrorKind::invalid_input,
                        "buffer_capacity_mol_per_ph needs a fixed \"ph\" in the chemistry "
                        "section (without one the pH follows the proton balance)");
    }
    v.ph0_ = v.ph_ = *v.base_.ph;
  }
  v.premixed_ml_ =
      scenario.chemistry.premixed_titrant_mol * 1000.0 / v.base_.titrant.conc_mol_per_l;
  if (!(v.premixed_ml_ < 0.5 * v.base_.sample_volume_ml)) {
    return make_error(ErrorKind::invalid_input,
                      "chemistry.premixed_titrant_mol is more titrant than the sample could hold");
  }
  if (auto r = v.solve(VesselContent{}); !r)
    return r.error();
  return v;
}

int VesselModel::metal_count() const {
  return general_ ? static_cast<int>(base_.metals.size()) : second_.present ? 2 : 1;
}

int VesselModel::metal_index(std::string_view name) const {
  if (name.empty())
    return 0;
  if (!general_) {
    if (name == metal_name_)
      return 0;
    return second_.present && name == second_.metal ? 1 : -1;
  }
  for (std::size_t i = 0; i < base_.metals.size(); ++i) {
    if (base_.metals[i].name == name)
      return static_cast<int>(i);
  }
  return -1;
}

int VesselModel::metal_charge(int metal) const {
  if (general_)
    return charges_.at(static_cast<std::size_t>(metal));
  return metal == 1 ? second_.charge : charge_;
}

Result<void> VesselModel::rebuild(const VesselContent& c) {
  chemistry::SampleComposition s = base_;
  const double v0 = base_.sample_volume_ml;
  const double v = v0 + std::max(0.0, c.other_ml);
  // Premixed titrant enters the model as titrant already added: the model's
  // own "sample" is smaller by its volume, so that every amount is kept and
  // the true volume comes out right once premixed_ml_ is added to the dose.
  const double f = v0 / (v - premixed_ml_);
  s.sample_volume_ml = v - premixed_ml_;
  for (auto& m : s.metals)
    m.conc_mol_per_l *= f;
  // mol into mmol over mL gives mol/L.
  s.metals[static_cast<std::size_t>(blank_metal_)].conc_mol_per_l +=
      c.extra_metal_mol * 1000.0 / s.sample_volume_ml;
  for (auto& l : s.ligands)
    l.total_mol_per_l *= f;
  if (s.indicator)
    s.indicator->conc_mol_per_l *= f;
  s.strong_acid_mol_per_l =
      (base_.strong_acid_mol_per_l * v0 + c.strong_acid_mol * 1000.0) / s.sample_volume_ml;
  if (capacity_mol_per_ph_ > 0.0) {
    // A linear buffer (see SampleSpec::buffer_capacity_mol_per_ph): the
    // engine then solves at that pH, so each metal's conditional constant
    // follows the acid and base dosed, and a metal that did not react at
    // the first pH reacts at the second.
    ph_ = std::clamp(ph0_ - c.strong_acid_mol / capacity_mol_per_ph_, 0.0, 14.0);
    s.ph = ph_;
  }
  absorbance_known_ = false;
  if (wavelength_nm_ && s.indicator) {
    chemistry::SampleComposition a = s;
    a.signal.kind = chemistry::SignalKind::absorbance;
    a.signal.wavelength_nm = *wavelength_nm_;
    auto model = chemistry::TitrationModel::create(*library_, a);
    if (model) {
      model_ = std::make_unique<chemistry::TitrationModel>(std::move(*model));
      absorbance_known_ = true;
    }
  }
  if (!absorbance_known_) {
    s.signal.kind = chemistry::SignalKind::p_metal;
    auto model = chemistry::TitrationModel::create(*library_, s);
    if (!model)
      return make_error(ErrorKind::invalid_input, "chemistry: " + model.error().message);
    model_ = std::make_unique<chemistry::TitrationModel>(std::move(*model));
  }
  warm_ = false;
  built_ = c;
  return {};
}

Result<void> VesselModel::solve(const VesselContent& content) {
  if (solved_ && *solved_ == content)
    return {};
  VesselContent c = content;
  c.titrant_ml = std::max(0.0, c.titrant_ml);
  if (!general_) {
    chemistry::OneToOneTitration d = one_to_one_;
    const double second_ml = std::max(0.0, c.second_titrant_ml);
    const double other = std::max(0.0, c.other_ml) + second_ml;
    const double mmol = one_to_one_.metal_conc_mol_per_l * one_to_one_.sample_volume_ml +
                        c.extra_metal_mol * 1000.0;
    d.sample_volume_ml = one_to_one_.sample_volume_ml + other;
    d.metal_conc_mol_per_l = mmol / d.sample_volume_ml;
    set_ph(c.strong_acid_mol);
    d.conditional_constant = one_to_one_.conditional_constant;
    species_ = vessel_species(d, c.titrant_ml);
    if (second_.present)
      solve_second(d.sample_volume_ml + c.titrant_ml, second_ml);
    solved_ = content;
    return {};
  }
  if (!built_ || built_->other_ml != c.other_ml || built_->extra_metal_mol != c.extra_metal_mol ||
      built_->strong_acid_mol != c.strong_acid_mol) {
    if (auto r = rebuild(c); !r)
      return r;
  }
  const double added_ml = c.titrant_ml + premixed_ml_;
  auto r = model_->solve_at(added_ml, speciation_, warm_ ? &speciation_ : nullptr);
  if (!r && warm_)
    r = model_->solve_at(added_ml, speciation_, nullptr);
  if (!r)
    return r;
  warm_ = true;
  solved_ = content;
  return {};
}

void VesselModel::set_ph(double strong_acid_mol) {
  if (!(capacity_mol_per_ph_ > 0.0))
    return;
  // A linear buffer: the pH falls by the net strong acid over the capacity.
  const double ph = std::clamp(ph0_ - strong_acid_mol / capacity_mol_per_ph_, 0.0, 14.0);
  if (ph == ph_)
    return;
  ph_ = ph;
  one_to_one_.conditional_constant = chemistry::conditional_formation_constant(
      log10_kf_, chemistry::fully_deprotonated_fraction(pka_, ph_), alpha_metal_);
}

void VesselModel::solve_second(double volume_ml, double second_ml) {
  // The sample's metal holds its share of the first titrant (its complex
  // far stronger and inert); the second titrant's metal meets the rest.
  // The exact 1:1 closed form with roles swapped: the free first titrant
  // is the "metal", the second titrant the "titrant".
  const double free_mmol = species_.free_titrant_mol_per_l * volume_ml;
  const double second_total = second_.true_conc_mol_per_l * second_ml / volume_ml;
  if (!(free_mmol > 0.0) || !(second_ml > 0.0)) {
    second_species_ = VesselSpecies{0.0, 0.0, second_total};
    second_species_.free_metal_mol_per_l = free_mmol / volume_ml;
    return;
  }
  chemistry::OneToOneTitration b;
  b.sample_volume_ml = volume_ml - second_ml;
  b.metal_conc_mol_per_l = free_mmol / b.sample_volume_ml;
  b.titrant_conc_mol_per_l = second_.true_conc_mol_per_l;
  b.conditional_constant = chemistry::conditional_formation_constant(
      second_.log10_formation_constant, chemistry::fully_deprotonated_fraction(pka_, ph_),
      second_.alpha_metal);
  second_species_ = vessel_species(b, second_ml);
}

double VesselModel::log10_activity(int metal) const {
  if (!general_) {
    // Nothing of the second metal before its first drop: a floor keeps the
    // logarithm finite (an electrode's detection limit lifts it further).
    const double free = free_metal_mol_per_l(metal);
    return std::log10(std::max(free, 1e-30));
  }
  double a = speciation_.log10_free[static_cast<std::size_t>(1 + metal)];
  if (base_.ionic_strength_mol_per_l) {
    a += chemistry::davies_log10_activity_coefficient(metal_charge(metal),
                                                      *base_.ionic_strength_mol_per_l);
  }
  return a;
}

double VesselModel::free_metal_mol_per_l(int metal) const {
  if (!general_)
    return metal == 1 ? second_species_.free_titrant_mol_per_l : species_.free_metal_mol_per_l;
  return speciation_.free_mol_per_l[static_cast<std::size_t>(1 + metal)];
}

double VesselModel::ph() const {
  return general_ ? speciation_.ph : ph_;
}

std::optional<double> VesselModel::absorbance() const {
  if (!general_ || !absorbance_known_)
    return std::nullopt;
  return model_->signal(speciation_);
}

}  // namespace veq::simulator
