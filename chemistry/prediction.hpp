// Predicted titration curves, breaks, indicator endpoints and feasibility for a
// sample composition, and the speciation of one composition: the plain C++ API
// behind `veq speciate` and `veq predict`. Results are plain structs with a
// to_json() each (and CSV for the curve).
#pragma once

#include <cmath>
#include <optional>
#include <string>
#include <utility>
#include <vector>

#include <nlohmann/json.hpp>

#include "chemistry/conditional.hpp"
#include "chemistry/constants.hpp"
#include "chemistry/equilibrium.hpp"
#include "chemistry/one_to_one.hpp"
#include "chemistry/sample.hpp"
#include "common/result.hpp"

namespace veq::chemistry {

/// The sample as a chemical system, evaluated at any added titrant volume.
class TitrationModel {
 public:
  /// Checks the sample against the library (every metal, ligand, titrant and
  /// indicator known; a 1:1 constant of each metal with the titrant; absorptivities
  /// at the requested wavelength) and builds the system.
  static Result<TitrationModel> create(const ConstantsLibrary& library,
                                       const SampleComposition& sample, SolverOptions options = {});

  const ChemicalSystem& system() const { return solver_.system(); }
  const SampleComposition& sample() const { return sample_; }

  /// Totals (diluted by the added titrant) and pH setting at added_ml of titrant.
  Conditions conditions_at(double added_ml) const;
  /// The same into `out`, reusing its storage (no allocation once sized).
  void conditions_at(double added_ml, Conditions& out) const;

  /// Equilibrium at added_ml, warm-started from `start` when given.
  Result<void> solve_at(double added_ml, Speciation& out, const Speciation* start = nullptr);

  /// Component index of metal i of the sample, of the titrant, of the indicator (-1).
  int metal_component(std::size_t i) const { return static_cast<int>(1 + i); }
  int titrant_component() const { return titrant_; }
  int indicator_component() const { return indicator_; }
  /// Index into the sample's metals of the signal's metal.
  std::size_t signal_metal() const { return signal_metal_; }

  /// pM = -log10 [M] of metal i (concentration scale).
  double p_metal(const Speciation& s, std::size_t i) const;
  /// The predicted signal: pM, potential in mV, or absorbance.
  double signal(const Speciation& s) const;
  /// Fraction of the indicator bound to metals (NaN without indicator).
  double indicator_bound_fraction(const Speciation& s) const;

  /// Volume of titrant in mL that binds all of metal i alone.
  double metal_volume_ml(std::size_t i) const;

  /// The exact 1:1 closed form for this sample, when the sample reduces to it:
  /// one metal, fixed pH, no auxiliary ligand, no indicator, no activity
  /// correction, mononuclear hydrolysis and only 1:1 metal-titrant species.
  /// Then [M'] from free_metal_mol_per_l() is the metal not bound to the titrant
  /// and [M] = [M'] / 10^closed_form_log10_alpha_metal().
  const std::optional<OneToOneTitration>& closed_form() const { return closed_form_; }
  double closed_form_log10_alpha_metal() const { return closed_form_log10_alpha_metal_; }

 private:
  TitrationModel(SampleComposition sample, EquilibriumSolver solver);
  SampleComposition sample_;
  EquilibriumSolver solver_;
  Conditions work_conditions_;  // reused by solve_at()
  int titrant_ = -1;
  int indicator_ = -1;
  std::size_t signal_metal_ = 0;
  std::vector<std::size_t> ligand_components_;    // per sample_.ligands entry (merged)
  std::vector<double> absorptivity_per_species_;  // L/(mol cm) per species, absorbance only
  double absorptivity_free_indicator_ = 0.0;
  std::optional<OneToOneTitration> closed_form_;
  double closed_form_log10_alpha_metal_ = 0.0;
  int metal_charge_ = 2;
  friend struct ModelBuilder;
};

/// Tuning of predict(). Defaults follow the usual analytical requirement of a
/// 0.1 % titration error with an endpoint located to +-0.2 pM.
struct PredictionOptions {
  /// Sharp enough when log10(C K') >= this; C is the metal concentration at its
  /// equivalence point. 6 is common practice: it follows from Ringbom's
  /// titration-error formula for 0.1 % error at +-0.2 pM.
  double sharpness_log10_ck = 6.0;
  /// Two metals can be titrated one after the other when their log10(C K')
  /// differ by at least this (common practice, same basis as above).
  double separation_log10_ck = 6.0;
  /// Uncertainty of locating the endpoint, in pM units, for the error estimate.
  double endpoint_uncertainty_p_metal = 0.2;
  /// Concentration at which each masking agent of the library is tried, mol/L;
  /// 0.1 is a typical addition (an excess over millimolar metals).
  double masking_total_mol_per_l = 0.1;
  /// pH step of the pH-window scan; 0.1 resolves windows finer than buffers hold pH.
  double ph_step = 0.1;
  /// Use the exact 1:1 closed form for the curve when the sample reduces to it.
  bool closed_form = true;
  SolverOptions solver;
};

struct CurvePoint {
  double volume_ml = 0.0;
  double ph = 0.0;
  double signal = 0.0;                             ///< pM, mV or absorbance as the sample asks
  std::vector<double> p_metal;                     ///< pM of each metal of the sample
  double indicator_bound_fraction = std::nan("");  ///< 0..1, NaN without indicator
};

/// A break of the predicted curve at one equivalence point.
struct BreakReport {
  std::string metal;                   ///< metal titrated up to this point
  double equivalence_volume_ml = 0.0;  ///< stoichiometric (cumulative) volume
  double inflection_volume_ml = 0.0;   ///< steepest point of that metal's pM near it
  /// Change of that metal's pM between 99 % and 101 % of its titration step.
  double p_metal_jump = 0.0;
  /// Change of the predicted signal over the same interval (pM, mV or absorbance).
  double signal_jump = 0.0;
  double max_slope_p_metal_per_ml = 0.0;  ///< |d pM / dV| at the inflection
};

/// Where the indicator changes colour (half of it bound to metal).
struct IndicatorEndpoint {
  double volume_ml = 0.0;
  std::string metal;  ///< the equivalence point it marks
  double equivalence_volume_ml = 0.0;
  double titration_error_percent = 0.0;  ///< (endpoint - equivalence) / equivalence * 100
};

struct MetalFeasibility {
  std::string metal;
  ConditionalConstant conditional;  ///< at the sample's pH with its ligands
  double conc_at_equivalence_mol_per_l = 0.0;
  double log10_ck = 0.0;
  bool sharp = false;
  /// Ringbom's estimate of the titration error in % for the endpoint uncertainty
  /// of PredictionOptions: (10^d - 10^-d) / sqrt(C K') * 100.
  double estimated_error_percent = 0.0;
  /// pH ranges where log10(C K') meets the criterion (with the sample's ligands).
  std::vector<std::pair<double, double>> ph_windows;
};

/// Two metals in one sample.
struct PairFeasibility {
  std::string first;  ///< the one with the larger log10(C K'): titrated first
  std::string second;
  double delta_log10_ck = 0.0;
  bool in_sequence = false;  ///< two separate sharp breaks at the sample's pH
  /// pH ranges where `first` can be titrated without `second` (both conditions met).
  std::vector<std::pair<double, double>> selective_ph_windows;
  /// Masking agents from the library (at PredictionOptions::masking_total_mol_per_l)
  /// with which one metal can be titrated in the presence of the other: pairs of
  /// (agent, metal that can then be titrated).
  std::vector<std::pair<std::string, std::string>> masking;
  std::string verdict;  ///< one sentence for the user
};

struct Feasibility {
  std::string criterion;  ///< the rule applied and its basis
  std::vector<MetalFeasibility> metals;
  std::vector<PairFeasibility> pairs;
};

struct Prediction {
  SampleComposition sample;
  std::string signal_label;  ///< "pZn", "potential_mv", "absorbance_620nm"
  std::vector<CurvePoint> curve;
  std::vector<BreakReport> breaks;
  std::optional<IndicatorEndpoint> indicator;
  Feasibility feasibility;
  bool closed_form_used = false;
};

/// The whole prediction for a sample: curve, breaks, indicator endpoint and feasibility.
Result<Prediction> predict(const ConstantsLibrary& library, const SampleComposition& sample,
                           const PredictionOptions& options = {});

/// Feasibility alone (no curve).
Result<Feasibility> assess_feasibility(const ConstantsLibrary& library,
                                       const SampleComposition& sample,
                                       const PredictionOptions& options = {});

struct ComponentSpeciation {
  std::string name;
  double total_mol_per_l = 0.0;  ///< proton: the proton excess
  double free_mol_per_l = 0.0;
  /// Fraction of the total in each form (free component first), largest first.
  std::vector<std::pair<std::string, double>> fractions;
};

struct SpeciationReport {
  double added_ml = 0.0;
  double ph = 0.0;
  double ionic_strength_mol_per_l = 0.0;
  int iterations = 0;
  double max_relative_residual = 0.0;
  std::vector<ComponentSpeciation> components;
  std::vector<std::pair<std::string, double>> species_mol_per_l;
  /// Conditional constant of each metal with the titrant at this pH.
  std::vector<std::pair<std::string, ConditionalConstant>> conditional;
};

/// Free concentrations and distribution of the sample after added_ml of titrant.
Result<SpeciationReport> speciate(const ConstantsLibrary& library, const SampleComposition& sample,
                                  double added_ml = 0.0, const SolverOptions& options = {});

nlohmann::json to_json(const ConditionalConstant& k);
nlohmann::json to_json(const Feasibility& f);
nlohmann::json to_json(const Prediction& p);
nlohmann::json to_json(const SpeciationReport& r);

/// The curve as CSV: volume_ml, pH, signal, then pM of each metal (and the bound
/// indicator fraction when there is an indicator); one header line.
std::string curve_csv(const Prediction& p);

}  // namespace veq::chemistry
