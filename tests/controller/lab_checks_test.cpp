// The lab's checks of its tools: water density, the gravimetric burette
// check, the electrode calibration and the titer.
#include "controller/lab_checks.hpp"

#include <gtest/gtest.h>

#include <cmath>

namespace veq::controller {
namespace {

TEST(WaterDensity, TanakaTable) {
  // M. Tanaka et al., Metrologia 38 (2001) 301, table of the density of
  // SMOW in kg/m3 (recalled from memory): 4 °C 999.9750, 10 °C 999.7026,
  // 15 °C 999.1026, 20 °C 998.2067, 25 °C 997.0470, 30 °C 995.6488.
  const double table[][2] = {{4.0, 999.9750},  {10.0, 999.7026}, {15.0, 999.1026},
                             {20.0, 998.2067}, {25.0, 997.0470}, {30.0, 995.6488}};
  for (const auto& row : table)
    EXPECT_NEAR(water_density_g_per_ml(row[0]).value() * 1000.0, row[1], 2e-4) << row[0] << " °C";
  EXPECT_FALSE(water_density_g_per_ml(45.0));
  EXPECT_FALSE(water_density_g_per_ml(std::nan("")));
}

TEST(WaterDensity, MassToVolumeFactor) {
  // ISO 8655-6:2002, annex A, table A.1, Z in mL/g at 101.3 kPa (recalled
  // from memory): 15 °C 1.0020, 20 °C 1.0029, 22 °C 1.0033, 25 °C 1.0040,
  // 30 °C 1.0054. The table rounds to 1e-4 and assumes air of about
  // 1.2 kg/m3; 50 % humidity moves Z by less than 1e-5.
  const double table[][2] = {
      {15.0, 1.0020}, {20.0, 1.0029}, {22.0, 1.0033}, {25.0, 1.0040}, {30.0, 1.0054}};
  for (const auto& row : table) {
    const double air = air_density_g_per_ml(row[0], 1013.25, 50.0);
    EXPECT_NEAR(mass_to_volume_factor_ml_per_g(row[0], air).value(), row[1], 6e-5) << row[0];
  }
  // Dry air at 20 °C and 1013.25 hPa: 1.204 kg/m3 (CRC Handbook, recalled
  // from memory).
  EXPECT_NEAR(air_density_g_per_ml(20.0, 1013.25, 0.0) * 1000.0, 1.204, 0.002);
}

TEST(BuretteCheck, PassesAndFailsAgainstTheTable) {
  // A 20 mL burette delivering 10 mL ten times at 20 °C: the masses are
  // those of exactly 10.000 mL (10 / Z) with a spread of +-3 mg.
  const double air = air_density_g_per_ml(20.0, 1013.25, 50.0);
  const double z = mass_to_volume_factor_ml_per_g(20.0, air).value();
  BuretteCheckInput in;
  in.nominal_volume_ml = 20.0;
  in.test_volume_ml = 10.0;
  in.water_temperature_c = 20.0;
  const double offsets_mg[] = {3, -3, 2, -2, 1, -1, 0, 0, 3, -3};
  for (double o : offsets_mg)
    in.water_masses_g.push_back(10.0 / z + o / 1000.0);
  auto good = check_burette(in);
  ASSERT_TRUE(good) << good.error().message;
  // Mean exactly 10 mL; SD of the offsets by hand: sum of squares 46 mg2 over
  // 9 = 2.261 mg, times Z.
  EXPECT_NEAR(good->mean_volume_ml, 10.0, 1e-9);
  EXPECT_NEAR(good->systematic_error_ul, 0.0, 1e-6);
  EXPECT_NEAR(good->random_error_ul, std::sqrt(46.0 / 9.0) * z, 1e-6);
  EXPECT_NEAR(good->limits.systematic_ul, 40.0, 0.0);
  EXPECT_TRUE(good->passed);
  EXPECT_NE(good->limits_source.find("ISO 8655-3"), std::string::npos);

  // 50 µL short: beyond the 40 µL systematic limit.
  for (double& m : in.water_masses_g)
    m -= 0.050 / z;
  auto short_delivery = check_burette(in);
  ASSERT_TRUE(short_delivery);
  EXPECT_NEAR(short_delivery->systematic_error_ul, -50.0, 1e-6);
  EXPECT_FALSE(short_delivery->systematic_within_limit);
  EXPECT_TRUE(short_delivery->random_within_limit);
  EXPECT_FALSE(short_delivery->passed);
}

TEST(BuretteCheck, BadInputNamesTheField) {
  BuretteCheckInput in;
  in.nominal_volume_ml = 20.0;
  in.test_volume_ml = 10.0;
  in.water_masses_g = {9.97, std::nan(""), 9.98};
  auto nan = check_burette(in);
  ASSERT_FALSE(nan);
  EXPECT_NE(nan.error().message.find("water_masses_g[2]"), std::string::npos);
  in.water_masses_g = {9.97};
  EXPECT_FALSE(check_burette(in));
  in.water_masses_g = {9.97, 9.98};
  in.nominal_volume_ml = 15.0;
  auto size = check_burette(in);
  ASSERT_FALSE(size);
  EXPECT_NE(size.error().message.find("15 mL burette"), std::string::npos);
  in.nominal_volume_ml = 20.0;
  in.water_temperature_c = 60.0;
  EXPECT_FALSE(check_burette(in));
}

TEST(ElectrodeCalibration, NernstianStandards) {
  // The Nernst slope at 25 °C is 59.16 mV per decade for a univalent ion
  // (D. C. Harris, Quantitative Chemical Analysis, 8th ed., section 14-2;
  // recalled from memory), 29.58 mV for a divalent one.
  EXPECT_NEAR(nernst_slope_mv_per_decade(25.0, 1), 59.16, 0.005);
  EXPECT_NEAR(nernst_slope_mv_per_decade(25.0, 2), 29.58, 0.005);
  // Four calcium standards on a line of 28.9 mV per decade with E0 = 120 mV
  // and residuals of +-0.3 mV at 22 °C.
  const double r[] = {0.3, -0.3, -0.3, 0.3};
  std::vector<CalibrationStandard> s;
  const double conc[] = {1e-4, 1e-3, 1e-2, 1e-1};
  for (int i = 0; i < 4; ++i)
    s.push_back({conc[i], 120.0 + 28.9 * std::log10(conc[i]) + r[i]});
  CalibrationOptions o;
  o.temperature_c = 22.0;
  auto cal = calibrate_electrode(s, o);
  ASSERT_TRUE(cal) << cal.error().message;
  // The residual pattern (+,-,-,+) is orthogonal to log10 c (-4,-3,-2,-1
  // centred: -1.5,-0.5,0.5,1.5 -> -0.45+0.15-0.15+0.45 = 0), so the slope
  // and intercept are exactly those of the line; residual SD by hand:
  // sqrt(4 * 0.09 / 2) = 0.4243 mV.
  EXPECT_NEAR(cal->slope_mv_per_decade, 28.9, 1e-9);
  EXPECT_NEAR(cal->e0_mv, 120.0, 1e-9);
  EXPECT_NEAR(cal->residual_sd_mv, std::sqrt(0.18), 1e-9);
  const double nernst_22 = nernst_slope_mv_per_decade(22.0, 2);
  EXPECT_NEAR(cal->slope_percent_of_nernst, 100.0 * 28.9 / nernst_22, 1e-9);
  EXPECT_NEAR(cal->slope_at_25c_mv_per_decade, 28.9 * 298.15 / 295.15, 1e-9);
  EXPECT_TRUE(cal->accepted) << cal->reason;
}

TEST(ElectrodeCalibration, RefusesAWornElectrodeAndBadStandards) {
  // 24 mV per decade at 25 °C is 81 % of Nernst: below the 90 % of common
  // practice.
  std::vector<CalibrationStandard> s{{1e-4, 0.0}, {1e-3, 24.0}, {1e-2, 48.0}};
  auto worn = calibrate_electrode(s);
  ASSERT_TRUE(worn);
  EXPECT_FALSE(worn->accepted);
  EXPECT_NE(worn->reason.find("% of the Nernst slope"), std::string::npos) << worn->reason;
  EXPECT_FALSE(calibrate_electrode({{1e-3, 10.0}}));
  auto zero = calibrate_electrode({{1e-3, 10.0}, {0.0, 40.0}});
  ASSERT_FALSE(zero);
  EXPECT_NE(zero.error().message.find("standard 2"), std::string::npos);
  EXPECT_FALSE(calibrate_electrode({{1e-3, 10.0}, {1e-3, 11.0}}));
}

TEST(Titer, FromAPrimaryStandard) {
  // 0.1001 g of calcium carbonate of 99.95 % purity (100.086 g/mol) titrated
  // to 19.95 mL of nominally 0.05 mol/L EDTA with a 0.03 mL blank. By hand:
  // 0.1001 * 0.9995 / 100.086 = 9.99640e-4 mol in 19.92 mL, 0.0501827 mol/L,
  // titer 1.003654.
  TiterDetermination d;
  d.standard_mass_g = 0.1001;
  d.standard_purity_percent = 99.95;
  d.standard_molar_mass_g_per_mol = 100.086;
  d.endpoint_ml = 19.95;
  d.blank_ml = 0.03;
  d.nominal_conc_mol_per_l = 0.05;
  auto t = titer_from_standard(d);
  ASSERT_TRUE(t) << t.error().message;
  EXPECT_NEAR(t->conc_mol_per_l, 0.1001 * 0.9995 / 100.086 / 0.01992, 1e-12);
  EXPECT_NEAR(t->conc_mol_per_l, 0.0501827, 5e-7);
  EXPECT_NEAR(t->titer, 1.003654, 5e-6);
  d.blank_ml = 20.0;
  auto bad = titer_from_standard(d);
  ASSERT_FALSE(bad);
  EXPECT_NE(bad.error().message.find("blank_ml"), std::string::npos);
}

}  // namespace
}  // namespace veq::controller
