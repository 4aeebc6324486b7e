#include "controller/lab_checks.hpp"

#include <algorithm>
#include <cmath>
#include <string>

#include "controller/messages.hpp"

namespace veq::controller {

namespace {

// Sample standard deviation (n - 1).
double sample_sd(const std::vector<double>& x, double mean) {
  double sum = 0.0;
  for (double v : x)
    sum += (v - mean) * (v - mean);
  return x.size() > 1 ? std::sqrt(sum / static_cast<double>(x.size() - 1)) : 0.0;
}

}  // namespace

veq::Result<double> water_density_g_per_ml(double temperature_c) {
  if (!std::isfinite(temperature_c) || temperature_c < 0.0 || temperature_c > 40.0) {
    return invalid_input("water temperature " + message_number(temperature_c) +
                         " °C is outside the water density table (0 to 40 °C)");
  }
  // Tanaka et al., Metrologia 38 (2001) 301, eq. 1, kg/m3.
  constexpr double a1 = -3.983035, a2 = 301.797, a3 = 522528.9, a4 = 69.34881, a5 = 999.974950;
  const double t = temperature_c;
  const double rho = a5 * (1.0 - (t + a1) * (t + a1) * (t + a2) / (a3 * (t + a4)));
  return rho / 1000.0;
}

double air_density_g_per_ml(double temperature_c, double pressure_hpa, double humidity_percent) {
  const double kg_per_m3 =
      (0.34848 * pressure_hpa - 0.009 * humidity_percent * std::exp(0.061 * temperature_c)) /
      (273.15 + temperature_c);
  return kg_per_m3 / 1000.0;
}

veq::Result<double> mass_to_volume_factor_ml_per_g(double water_temperature_c, double air_density,
                                                   double weight_density) {
  auto water = water_density_g_per_ml(water_temperature_c);
  if (!water)
    return water.error();
  if (!std::isfinite(air_density) || air_density < 0.0 || air_density > 0.01)
    return invalid_input("air density " + message_number(air_density) +
                         " g/mL is not a density of air");
  if (!std::isfinite(weight_density) || weight_density <= air_density)
    return invalid_input("reference weight density " + message_number(weight_density) +
                         " g/mL is not usable");
  return (1.0 / (*water - air_density)) * (1.0 - air_density / weight_density);
}

const BuretteLimitTable& piston_burette_limits() {
  static const BuretteLimitTable table{
      "ISO 8655-3:2002 (first edition)",
      "clause 7, table 1 (piston burettes)",
      "values recalled from memory, not copied from the standard: check them against "
      "your copy of the standard before relying on a pass",
      {
          {1.0, 6.0, 2.0},
          {2.0, 10.0, 4.0},
          {5.0, 15.0, 5.0},
          {10.0, 30.0, 10.0},
          {20.0, 40.0, 20.0},
          {25.0, 50.0, 25.0},
          {50.0, 100.0, 50.0},
          {100.0, 200.0, 100.0},
      }};
  return table;
}

veq::Result<BuretteErrorLimits> limits_for_burette(const BuretteLimitTable& table,
                                                   double nominal_volume_ml) {
  for (const BuretteErrorLimits& row : table.rows) {
    if (std::abs(row.nominal_volume_ml - nominal_volume_ml) <= 1e-9 * nominal_volume_ml)
      return row;
  }
  std::string sizes;
  for (const BuretteErrorLimits& row : table.rows)
    sizes += (sizes.empty() ? "" : ", ") + message_number(row.nominal_volume_ml);
  return invalid_input("nominal_volume_ml: " + table.standard + " gives no limits for a " +
                       message_number(nominal_volume_ml) +
                       " mL burette (sizes in the table: " + sizes + " mL)");
}

veq::Result<BuretteCheckResult> check_burette(const BuretteCheckInput& input,
                                              const BuretteLimitTable& table) {
  auto limits = limits_for_burette(table, input.nominal_volume_ml);
  if (!limits)
    return limits.error();
  if (!std::isfinite(input.test_volume_ml) || input.test_volume_ml <= 0.0 ||
      input.test_volume_ml > input.nominal_volume_ml) {
    return invalid_input("test_volume_ml: " + message_number(input.test_volume_ml) +
                         " mL must be above 0 and at most the nominal volume " +
                         message_number(input.nominal_volume_ml) + " mL");
  }
  if (input.water_masses_g.size() < 2) {
    return invalid_input(
        "water_masses_g: a burette check needs at least 2 deliveries (the standard "
        "asks for 10), got " +
        std::to_string(input.water_masses_g.size()));
  }
  for (std::size_t i = 0; i < input.water_masses_g.size(); ++i) {
    const double m = input.water_masses_g[i];
    if (!std::isfinite(m) || m <= 0.0) {
      return invalid_input("water_masses_g[" + std::to_string(i + 1) + "]: " + message_number(m) +
                           " g is not a positive mass");
    }
  }
  if (!std::isfinite(input.air_pressure_hpa) || input.air_pressure_hpa < 500.0 ||
      input.air_pressure_hpa > 1100.0) {
    return invalid_input("air_pressure_hpa: " + message_number(input.air_pressure_hpa) +
                         " hPa is outside 500-1100 hPa");
  }
  if (!std::isfinite(input.air_humidity_percent) || input.air_humidity_percent < 0.0 ||
      input.air_humidity_percent > 100.0) {
    return invalid_input("air_humidity_percent: " + message_number(input.air_humidity_percent) +
                         " % is outside 0-100 %");
  }
  const double air = air_density_g_per_ml(input.water_temperature_c, input.air_pressure_hpa,
                                          input.air_humidity_percent);
  auto z = mass_to_volume_factor_ml_per_g(input.water_temperature_c, air);
  if (!z)
    return z.error();

  BuretteCheckResult r;
  r.mass_to_volume_factor_ml_per_g = *z;
  double sum = 0.0;
  for (double m : input.water_masses_g) {
    r.volumes_ml.push_back(m * *z);
    sum += r.volumes_ml.back();
  }
  r.mean_volume_ml = sum / static_cast<double>(r.volumes_ml.size());
  r.systematic_error_ul = 1000.0 * (r.mean_volume_ml - input.test_volume_ml);
  r.systematic_error_percent =
      100.0 * (r.mean_volume_ml - input.test_volume_ml) / input.test_volume_ml;
  r.random_error_ul = 1000.0 * sample_sd(r.volumes_ml, r.mean_volume_ml);
  r.random_error_percent = 100.0 * r.random_error_ul / 1000.0 / r.mean_volume_ml;
  r.limits = *limits;
  r.limits_source = table.standard + ", " + table.clause;
  r.systematic_within_limit = std::abs(r.systematic_error_ul) <= limits->systematic_ul;
  r.random_within_limit = r.random_error_ul <= limits->random_ul;
  r.passed = r.systematic_within_limit && r.random_within_limit;
  return r;
}

double nernst_slope_mv_per_decade(double temperature_c, int charge) {
  // CODATA 2018 (exact in the 2019 SI).
  constexpr double kGas = 8.314462618;      // J/(mol K)
  constexpr double kFaraday = 96485.33212;  // C/mol
  return 1000.0 * kGas * (temperature_c + 273.15) * std::log(10.0) /
         (static_cast<double>(charge) * kFaraday);
}

veq::Result<CalibrationResult> calibrate_electrode(
    const std::vector<CalibrationStandard>& standards, const CalibrationOptions& o) {
  if (standards.size() < 2 || standards.size() > 5) {
    return invalid_input("an electrode calibration takes 2 to 5 standards, got " +
                         std::to_string(standards.size()));
  }
  if (o.charge == 0)
    return invalid_input("charge: the ion's charge must not be 0");
  if (!std::isfinite(o.temperature_c) || o.temperature_c < 0.0 || o.temperature_c > 100.0)
    return invalid_input("temperature_c: " + message_number(o.temperature_c) +
                         " °C is outside 0-100 °C");
  std::vector<double> x, y;
  for (std::size_t i = 0; i < standards.size(); ++i) {
    const CalibrationStandard& s = standards[i];
    if (!std::isfinite(s.conc_mol_per_l) || s.conc_mol_per_l <= 0.0) {
      return invalid_input("standard " + std::to_string(i + 1) + ": concentration " +
                           message_number(s.conc_mol_per_l) + " mol/L is not positive");
    }
    if (!std::isfinite(s.potential_mv)) {
      return invalid_input("standard " + std::to_string(i + 1) + ": the potential is not a number");
    }
    x.push_back(std::log10(s.conc_mol_per_l));
    y.push_back(s.potential_mv);
  }
  const double n = static_cast<double>(x.size());
  double mx = 0.0, my = 0.0;
  for (std::size_t i = 0; i < x.size(); ++i) {
    mx += x[i] / n;
    my += y[i] / n;
  }
  double sxx = 0.0, sxy = 0.0;
  for (std::size_t i = 0; i < x.size(); ++i) {
    sxx += (x[i] - mx) * (x[i] - mx);
    sxy += (x[i] - mx) * (y[i] - my);
  }
  if (!(sxx > 1e-6)) {
    return invalid_input(
        "the standards span no range of concentration: at least two different "
        "concentrations are needed");
  }
  CalibrationResult r;
  r.standards = static_cast<int>(standards.size());
  r.temperature_c = o.temperature_c;
  r.slope_mv_per_decade = sxy / sxx;
  r.e0_mv = my - r.slope_mv_per_decade * mx;
  double sse = 0.0;
  for (std::size_t i = 0; i < x.size(); ++i) {
    const double e = y[i] - (r.e0_mv + r.slope_mv_per_decade * x[i]);
    sse += e * e;
  }
  if (x.size() > 2) {
    r.residual_sd_mv = std::sqrt(sse / (n - 2.0));
    r.slope_uncertainty_mv_per_decade = r.residual_sd_mv / std::sqrt(sxx);
  }
  r.nernst_slope_mv_per_decade = nernst_slope_mv_per_decade(o.temperature_c, o.charge);
  r.slope_percent_of_nernst = 100.0 * r.slope_mv_per_decade / r.nernst_slope_mv_per_decade;
  // The slope is proportional to the absolute temperature.
  r.slope_at_25c_mv_per_decade = r.slope_mv_per_decade * (298.15 / (o.temperature_c + 273.15));
  if (r.slope_percent_of_nernst < o.min_slope_percent ||
      r.slope_percent_of_nernst > o.max_slope_percent) {
    r.reason = "slope " + message_number(r.slope_mv_per_decade) + " mV/decade is " +
               message_number(r.slope_percent_of_nernst) + " % of the Nernst slope " +
               message_number(r.nernst_slope_mv_per_decade) + " mV/decade at " +
               message_number(o.temperature_c) + " °C, outside " +
               message_number(o.min_slope_percent) + "-" + message_number(o.max_slope_percent) +
               " %";
  } else if (r.residual_sd_mv > o.max_residual_mv) {
    r.reason = "the standards scatter about the line by " + message_number(r.residual_sd_mv) +
               " mV, more than " + message_number(o.max_residual_mv) + " mV";
  }
  r.accepted = r.reason.empty();
  return r;
}

veq::Result<TiterValue> titer_from_standard(const TiterDetermination& d) {
  auto positive = [](double v, const char* field) -> veq::Result<void> {
    if (!std::isfinite(v) || v <= 0.0)
      return invalid_input(std::string(field) + ": " + message_number(v) +
                           " must be a positive number");
    return {};
  };
  for (auto check : {positive(d.standard_mass_g, "standard_mass_g"),
                     positive(d.standard_molar_mass_g_per_mol, "standard_molar_mass_g_per_mol"),
                     positive(d.titrant_per_standard, "titrant_per_standard"),
                     positive(d.endpoint_ml, "endpoint_ml"),
                     positive(d.nominal_conc_mol_per_l, "nominal_conc_mol_per_l")}) {
    if (!check)
      return check.error();
  }
  if (!std::isfinite(d.standard_purity_percent) || d.standard_purity_percent <= 0.0 ||
      d.standard_purity_percent > 100.0) {
    return invalid_input("standard_purity_percent: " + message_number(d.standard_purity_percent) +
                         " % must lie above 0 and at most 100");
  }
  if (!std::isfinite(d.blank_ml) || d.blank_ml < 0.0 || d.blank_ml >= d.endpoint_ml) {
    return invalid_input("blank_ml: " + message_number(d.blank_ml) +
                         " mL must lie from 0 up to the endpoint " + message_number(d.endpoint_ml) +
                         " mL");
  }
  const double standard_mol =
      d.standard_mass_g * (d.standard_purity_percent / 100.0) / d.standard_molar_mass_g_per_mol;
  TiterValue t;
  t.conc_mol_per_l =
      standard_mol * d.titrant_per_standard / ((d.endpoint_ml - d.blank_ml) / 1000.0);
  t.titer = t.conc_mol_per_l / d.nominal_conc_mol_per_l;
  return t;
}

}  // namespace veq::controller
