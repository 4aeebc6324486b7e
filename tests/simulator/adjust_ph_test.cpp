// pH that an adjust-pH step can move: acid and base from the auxiliary
// doser's two extra pumps move the 1:1 vessel's pH through its buffer
// capacity, the conditional constant follows, and a meter with a pH input
// reports it.
#include <gtest/gtest.h>

#include <cmath>
#include <memory>
#include <string>

#include "chemistry/conditional.hpp"
#include "chemistry/ligand.hpp"
#include "chemistry/one_to_one.hpp"
#include "drivers/auxiliary_doser_client.hpp"
#include "drivers/device_link.hpp"
#include "drivers/sensor_client.hpp"
#include "simulator/bench.hpp"
#include "simulator/virtual_electrode.hpp"

namespace veq::simulator {
namespace {

// Invented demo: the demo's calcium sample in a buffer of 2e-3 mol per pH
// unit, with 0.1 mol/L acid and base pumps.
std::string scenario_text(const std::string& capacity = "2.0e-3") {
  return R"({"seed": 3,
    "sample": {"metal": "calcium", "metal_conc_mol_per_l": 0.02, "volume_ml": 25.0, "ph": 10.0,
               "log10_formation_constant": 10.65, "buffer_capacity_mol_per_ph": )" +
         capacity + R"(},
    "titrant": {"label_conc_mol_per_l": 0.05, "pka": [0.0, 1.5, 2.0, 2.69, 6.13, 10.37]},
    "electrode": {"noise_mv": 0.0, "response_time_s": 0.0, "reports_ph": true,
                  "ph_noise": 0.005},
    "auxiliary_doser": {"acid": {"strong_acid_mol_per_l": 0.1},
                        "base": {"reservoir_ml": 500, "strong_acid_mol_per_l": -0.1}}})";
}

struct Host {
  drivers::VirtualClock clock;
  std::unique_ptr<SimulatedBench> bench;
  std::unique_ptr<drivers::DeviceLink> doser_link, sensor_link;
  std::unique_ptr<drivers::AuxiliaryDoserClient> doser;
  std::unique_ptr<drivers::PotentialSensorClient> sensor;

  explicit Host(const std::string& text) {
    auto s = parse_scenario(text, "ph");
    EXPECT_TRUE(s.has_value()) << (s ? "" : s.error().message);
    bench = std::make_unique<SimulatedBench>(*s, clock);
    doser_link =
        std::make_unique<drivers::DeviceLink>(bench->auxiliary_doser_line(), clock, "doser");
    sensor_link = std::make_unique<drivers::DeviceLink>(bench->electrode_line(), clock, "sensor");
    doser = std::make_unique<drivers::AuxiliaryDoserClient>(*doser_link);
    sensor = std::make_unique<drivers::PotentialSensorClient>(*sensor_link);
  }
};

TEST(AdjustPh, AcidAndBaseMoveThePhAsTheCapacitySays) {
  Host h(scenario_text());
  auto info = h.doser->identify();
  ASSERT_TRUE(info.has_value()) << info.error().message;
  EXPECT_TRUE(info->has(drivers::Reagent::acid));
  EXPECT_TRUE(info->has(drivers::Reagent::base));
  EXPECT_NEAR(h.bench->truths().vessel_ph, 10.0, 1e-12);
  // 5 mL x 0.1 mol/L = 5e-4 mol acid over 2e-3 mol/pH: 10 - 0.25 = 9.75.
  ASSERT_TRUE(h.doser->add(drivers::Reagent::acid, 5.0, 20.0).has_value());
  EXPECT_NEAR(h.bench->truths().vessel_ph, 9.75, 1e-12);
  // 10 mL base (1e-3 mol): net -5e-4 mol, 10 + 0.25 = 10.25.
  ASSERT_TRUE(h.doser->add(drivers::Reagent::base, 10.0, 20.0).has_value());
  EXPECT_NEAR(h.bench->truths().vessel_ph, 10.25, 1e-12);
}

TEST(AdjustPh, ThePhIsClampedToTheScale) {
  Host h(scenario_text("1.0e-5"));
  // 1e-3 mol base over 1e-5 mol/pH would be pH 110: the linear buffer stops at 14.
  ASSERT_TRUE(h.doser->add(drivers::Reagent::base, 10.0, 20.0).has_value());
  EXPECT_NEAR(h.bench->truths().vessel_ph, 14.0, 1e-12);
  ASSERT_TRUE(h.doser->add(drivers::Reagent::acid, 30.0, 20.0).has_value());  // net 2e-3 mol acid
  EXPECT_NEAR(h.bench->truths().vessel_ph, 0.0, 1e-12);
}

TEST(AdjustPh, TheConditionalConstantFollowsThePh) {
  Host h(scenario_text());
  ASSERT_TRUE(h.doser->add(drivers::Reagent::acid, 5.0, 20.0).has_value());
  // The 1:1 closed form (chemistry/one_to_one.hpp) at pH 9.75 with the
  // sample diluted by the 5 mL of acid, 2 mL past the equivalence (10 mL).
  chemistry::OneToOneTitration t;
  t.metal_conc_mol_per_l = 0.02 * 25.0 / 30.0;
  t.sample_volume_ml = 30.0;
  t.titrant_conc_mol_per_l = 0.05;
  const double pka[] = {0.0, 1.5, 2.0, 2.69, 6.13, 10.37};
  t.conditional_constant = chemistry::conditional_formation_constant(
      10.65, chemistry::fully_deprotonated_fraction(pka, 9.75), 1.0);
  const double e =
      150.0 + nernst_slope_mv(25.0) / 2.0 * std::log10(chemistry::free_metal_mol_per_l(t, 12.0));
  EXPECT_NEAR(h.bench->electrode().equilibrium_potential_mv(12.0), e, 1e-9);
  // Past the equivalence pCa = log K' + log([CaY]/[Y']) (Harris,
  // Quantitative Chemical Analysis, EDTA titration curves; recalled from
  // memory): at pH 9.75 alpha(Y) is 1/(1 + 10^0.62) = 10^-0.713 against
  // 1/(1 + 10^0.37) = 10^-0.524 at pH 10 (the last pKa, 10.37, decides), so
  // the electrode reads 0.189 x 29.58 mV = 5.59 mV higher than at a fixed
  // pH 10 with the same dilution.
  Host fixed(scenario_text("0"));
  ASSERT_TRUE(fixed.doser->add(drivers::Reagent::acid, 5.0, 20.0).has_value());
  EXPECT_NEAR(h.bench->electrode().equilibrium_potential_mv(12.0) -
                  fixed.bench->electrode().equilibrium_potential_mv(12.0),
              5.59, 0.02);
  EXPECT_NEAR(fixed.bench->truths().vessel_ph, 10.0, 1e-12);
}

TEST(AdjustPh, TheMeterReportsThePhWithItsNoise) {
  Host h(scenario_text());
  ASSERT_TRUE(h.doser->add(drivers::Reagent::acid, 5.0, 20.0).has_value());
  const int n = 200;
  double sum = 0.0;
  double sum_sq = 0.0;
  for (int i = 0; i < n; ++i) {
    auto r = h.sensor->read();
    ASSERT_TRUE(r.has_value()) << r.error().message;
    ASSERT_TRUE(r->ph.has_value());
    sum += *r->ph;
    sum_sq += *r->ph * *r->ph;
  }
  const double mean = sum / n;
  const double sd = std::sqrt((sum_sq - n * mean * mean) / (n - 1));
  // Seeded noise of 0.005 pH: the mean of 200 lies within 4 standard
  // errors (0.0014) of the true 9.75, the sample deviation within 0.003 to
  // 0.007 (the reported three decimals add 0.0003 of rounding).
  EXPECT_NEAR(mean, 9.75, 0.0015);
  EXPECT_GT(sd, 0.003);
  EXPECT_LT(sd, 0.007);
}

TEST(AdjustPh, AMeterWithoutAPhInputReportsNone) {
  std::string text = scenario_text();
  text.replace(text.find("\"reports_ph\": true"), 18, "\"reports_ph\": false");
  Host h(text);
  auto r = h.sensor->read();
  ASSERT_TRUE(r.has_value());
  EXPECT_FALSE(r->ph.has_value());
}

}  // namespace
}  // namespace veq::simulator
