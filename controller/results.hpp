// From endpoints to the numbers a lab reports: amounts, concentrations in
// the units asked for, water hardness, replicate statistics with the
// repeatability limit and an outlier test, and a GUM-style uncertainty
// budget. Pure computation.
#pragma once

#include <cstddef>
#include <optional>
#include <string>
#include <string_view>
#include <vector>

#include "common/result.hpp"

namespace veq::controller {

// ---------------------------------------------------------------------------
// Amounts

/// One titrant's part in a determination.
struct TitrantVolume {
  /// Nominal concentration on the label, mol/L.
  double nominal_conc_mol_per_l = 0.0;
  /// Titer: the found concentration over the nominal one (1 = as labelled).
  double titer = 1.0;
  /// Volume at the endpoint, or the volume added for an excess, mL.
  double volume_ml = 0.0;
  /// Blank volume subtracted, mL.
  double blank_ml = 0.0;
  /// Moles of analyte per mole of titrant (1 for a metal and EDTA).
  double analyte_per_titrant = 1.0;
};

/// mol of analyte in the titrated portion: c t (V - V_blank) nu / 1000.
/// Errors name the field that is not finite or out of range.
veq::Result<double> analyte_amount_mol(const TitrantVolume& titrant);

/// mol of analyte by back-titration: an excess of the first titrant (EDTA)
/// added, the excess titrated with the second (a zinc or magnesium
/// standard): n = c1 t1 V1 nu1 - c2 t2 (V2 - V2_blank) nu2 / 1000. The
/// `analyte_per_titrant` of the back titrant is moles of excess EDTA per
/// mole of back titrant (1 for Zn2+ or Mg2+). Error when the back-titration
/// used more than the excess (the result would be negative).
veq::Result<double> back_titration_amount_mol(const TitrantVolume& excess,
                                              const TitrantVolume& back);

/// The two metals of a two-stage or two-endpoint determination, mol: the
/// first from its own endpoint volume (e.g. calcium at pH 12-13, where
/// magnesium has precipitated as hydroxide), the second from the difference
/// to the total (calcium plus magnesium at pH 10). Error when the total is
/// below the first.
struct TwoMetalAmounts {
  double first_mol = 0.0;
  double second_mol = 0.0;
};
veq::Result<TwoMetalAmounts> amounts_from_total_and_first(const TitrantVolume& total,
                                                          const TitrantVolume& first);

/// One stage of a vessel titrated in stages (a first metal at one pH, a
/// second after the pH was changed), as the burette counted it: its counter
/// starts at 0 with each stage's titration.
struct StageReading {
  double endpoint_ml = 0.0;  ///< the stage's endpoint, mL from the stage's start
  /// All the stage dosed (its last reading), mL. The titrant dosed past the
  /// endpoint stays in the vessel and reacts in the next stage.
  double dosed_ml = 0.0;
  double endpoint_uncertainty_ml = 0.0;  ///< standard uncertainty of the endpoint, mL
};

/// Titrant counted over stages, mL, with the standard uncertainty of the
/// endpoints it rests on.
struct CountedTitrant {
  double volume_ml = 0.0;
  double uncertainty_ml = 0.0;
};

/// mL of titrant from a point of stage `from_stage` (its start, or its
/// endpoint if `from_endpoint`) to the endpoint of stage `to_stage` (stages
/// numbered from 1, from_stage <= to_stage, all with one titrant):
///   V = dosed(from) + ... + dosed(to - 1) + endpoint(to)
///       - (from_endpoint ? endpoint(from) : 0).
/// From stage 1's start: the titrant of every metal titrated up to `to`;
/// from the endpoint of the stage before: the second metal's own. The
/// endpoints used combine in quadrature (the burette's own tolerance is
/// the budget's business). Errors: a stage out of range, counting from the
/// endpoint of the stage itself, an endpoint beyond what its stage dosed.
veq::Result<CountedTitrant> titrant_between(const std::vector<StageReading>& stages,
                                            std::size_t from_stage, bool from_endpoint,
                                            std::size_t to_stage);

// ---------------------------------------------------------------------------
// Concentrations

/// The units a result is reported in.
enum class ResultUnit : int {
  mol_per_l = 0,
  mmol_per_l = 1,
  mg_per_l = 2,
  mass_percent = 3,  ///< % w/w, g per 100 g of sample
  mg_per_kg = 4,
};
const char* result_unit_name(ResultUnit unit) noexcept;
std::optional<ResultUnit> result_unit_from_name(std::string_view name);

/// How much sample was taken and how it was prepared.
struct SampleSize {
  /// Volume of the (diluted) sample titrated, mL; 0 when the sample was
  /// weighed.
  double aliquot_ml = 0.0;
  /// Mass of sample weighed, g; 0 when an aliquot was measured by volume.
  double mass_g = 0.0;
  /// Final volume over original volume (or mass) of any dilution before
  /// the aliquot was taken; 1 when none.
  double dilution_factor = 1.0;
  /// Density of the original sample, g/mL: needed to report a volume
  /// sample per mass (mass_percent, mg_per_kg) or a weighed one per volume.
  double density_g_per_ml = 0.0;
};

/// The concentration of the analyte in the original sample in `unit`.
/// `molar_mass_g_per_mol` is needed for the mass-based units. Errors name
/// what is missing: a molar mass, a density for a conversion between mass
/// and volume, a sample size.
veq::Result<double> concentration(double amount_mol, const SampleSize& sample, ResultUnit unit,
                                  double molar_mass_g_per_mol = 0.0);

// ---------------------------------------------------------------------------
// Water hardness

/// Total hardness of a water in the units labs report. 1 mmol/L of alkaline
/// earth ions is 100.086 mg/L as CaCO3 (its molar mass from the IUPAC 2021
/// atomic weights), 5.6077 German degrees (1 °dH = 10 mg/L CaO, CaO 56.077
/// g/mol) and 10.0086 French degrees (1 °f = 10 mg/L CaCO3). Definitions:
/// DIN 38409-6 and common use; recalled from memory.
struct WaterHardness {
  double mmol_per_l = 0.0;
  double mg_per_l_as_caco3 = 0.0;
  double german_degrees = 0.0;
  double french_degrees = 0.0;
};
WaterHardness water_hardness(double alkaline_earth_mmol_per_l);

// ---------------------------------------------------------------------------
// Replicates

/// Grubbs test for one outlying value among replicates, with the critical
/// values of ISO 5725-2:1994, clause 7.3.4, table 5 (recalled from memory;
/// the tests check them against the Student t distribution).
struct OutlierTest {
  std::string name = "Grubbs test for one outlying observation (ISO 5725-2:1994, 7.3.4)";
  std::size_t suspect_index = 0;  ///< the value farthest from the mean
  double statistic = 0.0;         ///< |x - mean| / s
  double critical_5_percent = 0.0;
  double critical_1_percent = 0.0;
  /// "none", "straggler" (beyond the 5 % value) or "outlier" (beyond 1 %),
  /// the words of ISO 5725-2.
  std::string verdict = "none";
};

/// Critical values of the Grubbs test for n = 3 to 20 observations; an
/// error outside.
struct GrubbsCritical {
  double five_percent = 0.0;
  double one_percent = 0.0;
};
veq::Result<GrubbsCritical> grubbs_critical(std::size_t n);

struct ReplicateStatistics {
  std::size_t count = 0;
  double mean = 0.0;
  double sd = 0.0;  ///< sample standard deviation (n - 1)
  double rsd_percent = 0.0;
  /// For duplicates with a known repeatability standard deviation s_r of
  /// the method: r = 2.8 s_r (ISO 5725-6:1994, 4.1.4) and whether the
  /// difference stays within it.
  std::optional<double> repeatability_limit;
  std::optional<bool> duplicates_within_limit;
  /// For three or more replicates.
  std::optional<OutlierTest> outlier;
};

/// Statistics of the replicate results of one sample. Errors: no values, a
/// value that is not finite (with its position).
veq::Result<ReplicateStatistics> replicate_statistics(
    const std::vector<double>& values, std::optional<double> repeatability_sd = std::nullopt);

// ---------------------------------------------------------------------------
// Uncertainty

/// One input quantity of a result and its standard uncertainty.
struct UncertaintyComponent {
  std::string name;                   ///< e.g. "titrant volume"
  double value = 0.0;                 ///< the input's value, in its own unit
  double standard_uncertainty = 0.0;  ///< same unit
  std::string basis;                  ///< how it was evaluated, e.g. "rectangular, ±a/√3"
  /// Filled in by the budget: u/value and its share of the combined
  /// variance, %.
  double relative_uncertainty = 0.0;
  double share_percent = 0.0;
};

/// A GUM-style budget of a result computed as a product and quotient of
/// its inputs (all titration results are), where the relative standard
/// uncertainties add in quadrature (JCGM 100:2008 (GUM) 5.1.6; EURACHEM/
/// CITAC Guide "Quantifying Uncertainty in Analytical Measurement", 3rd
/// ed., 2012, appendix A.4). Repeatability enters as a factor of value 1
/// with the relative standard deviation as its uncertainty.
struct UncertaintyBudget {
  double result = 0.0;
  std::vector<UncertaintyComponent> components;
  double combined_relative = 0.0;
  double combined_standard = 0.0;  ///< in the result's unit
  double coverage_factor = 2.0;
  double expanded = 0.0;  ///< k times the combined standard uncertainty
};

/// The budget for `result` from its components. Errors name a component
/// whose value is zero or not finite, or whose uncertainty is negative.
veq::Result<UncertaintyBudget> product_quotient_budget(double result,
                                                       std::vector<UncertaintyComponent> components,
                                                       double coverage_factor = 2.0);

/// mL: standard uncertainty of a net titrant volume V_endpoint - V_blank
/// from the burette's tolerance (the ISO 8655 systematic limit ±a taken as
/// a rectangular distribution, a/√3, EURACHEM/CITAC guide 8.1.6), the
/// endpoint's standard uncertainty from the detection, and the blank's.
double net_volume_uncertainty_ml(double burette_tolerance_ml, double endpoint_uncertainty_ml,
                                 double blank_uncertainty_ml);

}  // namespace veq::controller
