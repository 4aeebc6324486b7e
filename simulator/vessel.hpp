// The chemistry of the vessel the virtual instruments dip into: either the
// exact 1:1 closed form (the scenario's sample section) or the general
// equilibrium engine with the shipped constants library (its chemistry
// section), with the sample diluted by other liquid and the hidden blank
// metal and reagent acid added.
#pragma once

#include <memory>
#include <optional>
#include <string>
#include <string_view>
#include <vector>

#include "chemistry/one_to_one.hpp"
#include "chemistry/prediction.hpp"
#include "common/result.hpp"
#include "simulator/scenario.hpp"

namespace veq::simulator {

/// What has entered the vessel besides the sample, at one moment.
struct VesselContent {
  double titrant_ml = 0.0;         ///< titrant that has reacted (or reached the probe), mL
  double other_ml = 0.0;           ///< auxiliary reagents, mL (dilution)
  double extra_metal_mol = 0.0;    ///< blank: metal from the buffer and reagents, mol
  double strong_acid_mol = 0.0;    ///< strong acid from reagents (negative: base), mol
  double second_titrant_ml = 0.0;  ///< from the second burette (back-titration), mL

  bool operator==(const VesselContent&) const = default;
};

/// Concentrations in the vessel after adding titrant (mol/L).
struct VesselSpecies {
  double free_metal_mol_per_l = 0.0;    ///< [M'], not bound by the titrant
  double complex_mol_per_l = 0.0;       ///< [MY]
  double free_titrant_mol_per_l = 0.0;  ///< [Y'], not bound to the metal
};

/// The three species from the exact 1:1 equilibrium and the mass balances
/// C_M = [M'] + [MY], C_Y = [Y'] + [MY], both totals diluted to the vessel's
/// volume (sample + titrant).
VesselSpecies vessel_species(const chemistry::OneToOneTitration& t, double titrant_ml);

/// The 1:1 chemistry of a scenario's sample with the true titrant.
chemistry::OneToOneTitration scenario_chemistry(const Scenario& scenario);

/// The sample of the chemistry section with the true titrant (checked).
Result<chemistry::SampleComposition> scenario_composition(const Scenario& scenario);

/// The vessel's equilibrium at one content. Not thread-safe; one per device.
class VesselModel {
 public:
  /// absorbance_wavelength_nm: (chemistry section only) the wavelength at
  /// which absorbance() is wanted; the library's absorptivities there are used.
  static Result<VesselModel> create(const Scenario& scenario,
                                    std::optional<double> absorbance_wavelength_nm = {});

  bool general() const { return general_; }
  /// Solves at a content (cached: the same content is not solved twice).
  Result<void> solve(const VesselContent& content);

  /// Index of a metal by name (chemistry section), or in the 1:1 model 0
  /// for the sample's metal and 1 for the second titrant's; -1 if unknown.
  /// Empty name: the first metal.
  int metal_index(std::string_view name) const;
  int metal_count() const;
  int metal_charge(int metal) const;
  /// log10 of the free metal ion's activity (concentration in the 1:1 model:
  /// [M'], as the closed form gives it; Davies-corrected when the chemistry
  /// section sets an ionic strength).
  double log10_activity(int metal) const;
  double free_metal_mol_per_l(int metal) const;
  double ph() const;
  /// 1:1 model only: free metal, complex and free titrant.
  const VesselSpecies& one_to_one_species() const { return species_; }
  /// 1:1 model with a second titrant only: the back-titration's species
  /// with roles swapped: "metal" is the first titrant left free by the
  /// sample's metal, "titrant" the second titrant's metal.
  const VesselSpecies& second_species() const { return second_species_; }
  /// Chemistry section only: absorbance per the indicator's and complexes'
  /// absorptivities at the wavelength given to create() (Beer-Lambert over
  /// the sample's path length in the section's signal), or nothing if the
  /// library has none there.
  std::optional<double> absorbance() const;
  /// Chemistry section only: the model at the last solved content.
  const chemistry::TitrationModel* model() const { return model_.get(); }
  const chemistry::Speciation& speciation() const { return speciation_; }

 private:
  VesselModel() = default;
  Result<void> rebuild(const VesselContent& content);
  /// 1:1: the pH after net strong acid (mol) and the conditional constant at it.
  void set_ph(double strong_acid_mol);
  /// 1:1: the back-titration's species in the vessel's volume (mL).
  void solve_second(double volume_ml, double second_ml);

  bool general_ = false;
  // 1:1
  chemistry::OneToOneTitration one_to_one_;
  int charge_ = 2;
  VesselSpecies species_;
  std::string metal_name_;
  SecondTitrantSpec second_;
  VesselSpecies second_species_;
  // pH and what the conditional constants need to follow it (the general
  // model uses ph0_, ph_ and the capacity when its pH is fixed and the
  // scenario gives a buffer capacity)
  std::vector<double> pka_;
  double ph0_ = 7.0;
  double ph_ = 7.0;
  double capacity_mol_per_ph_ = 0.0;
  double log10_kf_ = 0.0;
  double alpha_metal_ = 1.0;
  // general
  std::shared_ptr<const chemistry::ConstantsLibrary> library_;
  chemistry::SampleComposition base_;
  std::optional<double> wavelength_nm_;
  bool absorbance_known_ = false;
  std::unique_ptr<chemistry::TitrationModel> model_;
  std::vector<int> charges_;
  int blank_metal_ = 0;
  double premixed_ml_ = 0.0;  ///< premixed titrant as a volume of the true titrant, mL
  chemistry::Speciation speciation_;
  bool warm_ = false;
  // cache
  std::optional<VesselContent> solved_;
  std::optional<VesselContent> built_;  // other_ml, extra metal and acid of model_
};

}  // namespace veq::simulator
