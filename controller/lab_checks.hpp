// The lab's own checks of its tools: the gravimetric burette check, the
// electrode calibration and the titer of a titrant against a primary
// standard. Pure computation on numbers the series collected.
#pragma once

#include <string>
#include <vector>

#include "common/result.hpp"

namespace veq::controller {

// ---------------------------------------------------------------------------
// Water, air and the mass-to-volume factor

/// g/mL: density of air-free water at `temperature_c` (0-40 °C) by the
/// formula of M. Tanaka, G. Girard, R. Davis, A. Peuto, N. Bignell,
/// "Recommended table for the density of water between 0 °C and 40 °C based
/// on recent experimental reports", Metrologia 38 (2001) 301-309, eq. 1
/// (constants recalled from memory; the tests check them against the same
/// paper's table). Error outside 0-40 °C.
veq::Result<double> water_density_g_per_ml(double temperature_c);

/// g/mL: density of moist air from its temperature, pressure and relative
/// humidity by the approximation of OIML R 111-1:2004, annex E, eq. E.3-1
/// (recalled from memory): rho_a = (0.34848 p - 0.009 h exp(0.061 t)) /
/// (273.15 + t) kg/m3 with p in hPa, h in %, t in °C.
double air_density_g_per_ml(double temperature_c, double pressure_hpa, double humidity_percent);

/// mL/g: the factor Z that turns a weighed mass of water into the volume
/// it filled at the water's temperature, with the buoyancy of air on the
/// water and on the balance's reference weights:
/// Z = (1 / (rho_w - rho_a)) (1 - rho_a / rho_b) (ISO 8655-6:2002, annex A,
/// recalled from memory; reference weights of 8.0 g/mL, OIML R 111-1).
veq::Result<double> mass_to_volume_factor_ml_per_g(double water_temperature_c,
                                                   double air_density_g_per_ml,
                                                   double weight_density_g_per_ml = 8.0);

// ---------------------------------------------------------------------------
// Gravimetric burette check

/// The largest errors a piston burette of one nominal volume may have, as a
/// row of the standard's table.
struct BuretteErrorLimits {
  double nominal_volume_ml = 0.0;
  /// Largest systematic error (mean delivered minus intended), µL; the
  /// table's absolute value applies at every test volume.
  double systematic_ul = 0.0;
  /// Largest random error (repeatability standard deviation), µL.
  double random_ul = 0.0;
};

/// The table the burette check uses, with where it comes from.
struct BuretteLimitTable {
  std::string standard;  ///< e.g. "ISO 8655-3:2002"
  std::string clause;    ///< e.g. "clause 7, table 1"
  std::string note;      ///< how the values were obtained
  std::vector<BuretteErrorLimits> rows;
};

/// The limits for piston burettes of ISO 8655-3:2002 (first edition), table
/// 1, for 1 to 100 mL. The values are recalled from memory and marked so in
/// `note`: check them against the standard before relying on a pass.
const BuretteLimitTable& piston_burette_limits();

/// The row for a burette's nominal volume; an error naming the volume when
/// the table holds no such size.
veq::Result<BuretteErrorLimits> limits_for_burette(const BuretteLimitTable& table,
                                                   double nominal_volume_ml);

/// One gravimetric delivery test at one test volume.
struct BuretteCheckInput {
  /// Nominal volume of the burette's cylinder, mL (selects the limits).
  double nominal_volume_ml = 0.0;
  /// Volume the burette was told to deliver, mL (ISO 8655-6 tests at 100 %,
  /// 50 % and 10 % of the nominal volume; one input per test volume).
  double test_volume_ml = 0.0;
  /// Net masses of water delivered, g, one per delivery (at least 2; the
  /// standard asks for 10 per test volume).
  std::vector<double> water_masses_g;
  /// Water temperature, °C.
  double water_temperature_c = 20.0;
  /// Air pressure, hPa. Default 1013.25, the standard atmosphere.
  double air_pressure_hpa = 1013.25;
  /// Relative humidity of the air, %. Default 50, a typical lab.
  double air_humidity_percent = 50.0;
};

/// The outcome of a burette check at one test volume.
struct BuretteCheckResult {
  double mass_to_volume_factor_ml_per_g = 0.0;
  std::vector<double> volumes_ml;    ///< each delivery, mL
  double mean_volume_ml = 0.0;       ///< mL
  double systematic_error_ul = 0.0;  ///< mean minus test volume, µL
  double systematic_error_percent = 0.0;
  double random_error_ul = 0.0;       ///< sample standard deviation, µL
  double random_error_percent = 0.0;  ///< coefficient of variation, %
  BuretteErrorLimits limits;
  std::string limits_source;  ///< standard, edition and clause
  bool systematic_within_limit = false;
  bool random_within_limit = false;
  bool passed = false;
};

/// Volumes from the masses with the factor Z at the test's temperature and
/// air, their mean and spread, and the verdict against the table. Errors
/// name the field: a non-finite or non-positive mass (with its position),
/// fewer than two deliveries, a temperature outside the water table, a
/// burette size the table does not hold.
veq::Result<BuretteCheckResult> check_burette(
    const BuretteCheckInput& input, const BuretteLimitTable& table = piston_burette_limits());

// ---------------------------------------------------------------------------
// Electrode calibration

/// One calibration standard: a solution of known metal-ion concentration
/// and the electrode's settled potential in it.
struct CalibrationStandard {
  double conc_mol_per_l = 0.0;
  double potential_mv = 0.0;
};

/// How a calibration is computed and accepted; the reason for each default
/// is beside it.
struct CalibrationOptions {
  /// Temperature of the standards, °C: sets the Nernst slope the measured
  /// one is compared with.
  double temperature_c = 25.0;
  /// Charge of the measured ion (2 for Ca2+, Cu2+ ...).
  int charge = 2;
  /// Accepted slope as a share of the Nernst slope, %. Defaults 90-105:
  /// common practice for a working ion-selective electrode; a slope below
  /// about 90 % marks a worn membrane.
  double min_slope_percent = 90.0;
  double max_slope_percent = 105.0;
  /// Largest residual standard deviation of the standards about the line,
  /// mV. Default 2: common practice; more says a standard or the electrode
  /// is wrong.
  double max_residual_mv = 2.0;
  /// How long the calibration stays valid, hours. Default 24: common
  /// practice (calibrate once a working day).
  double valid_for_hours = 24.0;
};

struct CalibrationResult {
  /// Fitted slope, mV per decade of concentration, at the calibration's
  /// temperature (positive for a cation electrode).
  double slope_mv_per_decade = 0.0;
  /// Standard potential, mV: the line's value at 1 mol/L.
  double e0_mv = 0.0;
  /// The Nernst slope at the calibration's temperature, mV per decade.
  double nernst_slope_mv_per_decade = 0.0;
  /// Measured slope as a share of it, %: the figure that does not depend
  /// on the temperature, for comparing calibrations made on warm and cold
  /// days.
  double slope_percent_of_nernst = 0.0;
  /// The slope this electrode would show at 25 °C, mV per decade.
  double slope_at_25c_mv_per_decade = 0.0;
  double slope_uncertainty_mv_per_decade = 0.0;  ///< standard uncertainty (0 for two standards)
  double residual_sd_mv = 0.0;                   ///< 0 for two standards
  double temperature_c = 25.0;
  int standards = 0;
  bool accepted = false;
  /// Why it was refused (empty when accepted).
  std::string reason;
};

/// mV per decade: the Nernst slope 1000 R T ln(10) / (z F) with R and F
/// from CODATA 2018.
double nernst_slope_mv_per_decade(double temperature_c, int charge);

/// Least-squares line E = E0 + S log10(c) through 2 to 5 standards, and the
/// verdict against the options. Errors name the problem: fewer than 2 or
/// more than 5 standards, a concentration that is not positive or not
/// finite (with its position), two standards of the same concentration
/// only. A slope outside the limits is not an error: the result says it is
/// not accepted and why.
veq::Result<CalibrationResult> calibrate_electrode(
    const std::vector<CalibrationStandard>& standards, const CalibrationOptions& options = {});

// ---------------------------------------------------------------------------
// Titer

/// One titration of a weighed primary standard.
struct TiterDetermination {
  double standard_mass_g = 0.0;
  /// Purity of the standard as a mass fraction, % (from its certificate).
  double standard_purity_percent = 100.0;
  /// Molar mass of the standard, g/mol.
  double standard_molar_mass_g_per_mol = 0.0;
  /// Moles of titrant per mole of standard (1 for a metal and EDTA).
  double titrant_per_standard = 1.0;
  /// Endpoint volume, mL.
  double endpoint_ml = 0.0;
  /// Blank volume subtracted from the endpoint, mL.
  double blank_ml = 0.0;
  /// Nominal titrant concentration, mol/L.
  double nominal_conc_mol_per_l = 0.0;
};

struct TiterValue {
  double conc_mol_per_l = 0.0;  ///< the titrant's concentration found
  double titer = 0.0;           ///< found over nominal: the factor results use
};

/// c = m w / M * nu / (V_endpoint - V_blank); titer = c / c_nominal.
/// Errors name the field that is missing, not finite or out of range, and
/// a blank not below the endpoint.
veq::Result<TiterValue> titer_from_standard(const TiterDetermination& d);

}  // namespace veq::controller
