// A back-titration on one simulated bench: EDTA in excess from the first
// burette binds the sample's nickel, a zinc solution from a second burette
// titrates what is left, and a zinc-sensing electrode breaks where the zinc
// has used up the excess.
#include <gtest/gtest.h>

#include <cmath>
#include <memory>
#include <string>
#include <vector>

#include "drivers/burette_client.hpp"
#include "drivers/device_link.hpp"
#include "drivers/sample_changer_client.hpp"
#include "drivers/sensor_client.hpp"
#include "simulator/bench.hpp"
#include "simulator/virtual_electrode.hpp"

namespace veq::simulator {
namespace {

// Invented demo: nickel in a plating rinse, back-titrated with zinc at pH
// 5.5. log Kf of Ni-EDTA 18.4 and Zn-EDTA 16.5 (Harris, Quantitative
// Chemical Analysis, formation constants of EDTA complexes table; recalled
// from memory); EDTA's pKa as in the demo scenario.
constexpr const char* kBackTitration = R"({
  "seed": 5,
  "sample": {"metal": "nickel", "metal_conc_mol_per_l": 0.01, "volume_ml": 25.0, "ph": 5.5,
             "log10_formation_constant": 18.4},
  "titrant": {"name": "EDTA", "label_conc_mol_per_l": 0.05, "true_conc_mol_per_l": 0.0502,
              "pka": [0.0, 1.5, 2.0, 2.69, 6.13, 10.37]},
  "second_titrant": {"name": "zinc sulfate", "metal": "zinc", "label_conc_mol_per_l": 0.025,
                     "true_conc_mol_per_l": 0.0249, "log10_formation_constant": 16.5},
  "second_burette": {"serial_number": "virtual-burette-2", "systematic_error_percent": 0.2},
  "electrode": {"metal": "zinc", "noise_mv": 0.0, "response_time_s": 0.0}
})";

struct BackTitrationHost {
  drivers::VirtualClock clock;
  std::unique_ptr<SimulatedBench> bench;
  std::unique_ptr<drivers::DeviceLink> first_link, second_link, sensor_link;
  std::unique_ptr<drivers::BuretteClient> first, second;
  std::unique_ptr<drivers::PotentialSensorClient> sensor;

  explicit BackTitrationHost(const Scenario& s) {
    bench = std::make_unique<SimulatedBench>(s, clock);
    first_link = std::make_unique<drivers::DeviceLink>(bench->burette_line(), clock, "burette");
    second_link =
        std::make_unique<drivers::DeviceLink>(bench->second_burette_line(), clock, "burette 2");
    sensor_link = std::make_unique<drivers::DeviceLink>(bench->electrode_line(), clock, "sensor");
    first = std::make_unique<drivers::BuretteClient>(*first_link);
    second = std::make_unique<drivers::BuretteClient>(*second_link);
    sensor = std::make_unique<drivers::PotentialSensorClient>(*sensor_link);
  }
};

TEST(BackTitration, TheZincBreaksWhereTheExcessEdtaIsUsedUp) {
  auto s = parse_scenario(kBackTitration, "back");
  ASSERT_TRUE(s.has_value()) << s.error().message;
  BackTitrationHost h(*s);
  auto who = h.second->identify();
  ASSERT_TRUE(who.has_value());
  EXPECT_EQ(who->serial_number, "virtual-burette-2");
  ASSERT_TRUE(h.first->dose(5.0, 20.0).has_value());
  ASSERT_TRUE(h.first->dose(5.0, 20.0).has_value());
  // Stoichiometry 1:1 twice: 10 mL x 0.0502 mol/L = 5.02e-4 mol EDTA, less
  // 0.01 mol/L x 25 mL = 2.5e-4 mol nickel, leaves 2.52e-4 mol for the zinc:
  // 2.52e-4 / 0.0249 mol/L = 10.1205 mL delivered, which the second burette
  // (delivering 0.2 % more than it shows) shows as 10.1003 mL.
  const BenchTruths t = h.bench->truths();
  EXPECT_NEAR(t.titrant_delivered_ml, 10.0, 1e-9);
  EXPECT_NEAR(t.second_equivalence_reading_ml, 2.52e-4 / 0.0249 * 1000.0 / 1.002, 1e-9);
  EXPECT_NEAR(t.second_equivalence_reading_ml, 10.1003, 1e-4);
  // The curve through the protocol: doses of 0.02 mL (the burette's step
  // is 0.001 mL) across the break; the steepest step's middle lies within
  // half a step (0.01 mL) of the inflection, and the 1:1 inflection lies
  // 5e-5 mL before the equivalence for K' = 10^16.5 x alpha(Y, pH 5.5) =
  // 10^10.91 (alpha = 10^-5.59 from the pKa above) at 7.2e-3 mol/L excess
  // EDTA in 35 mL (the closed form evaluated on a 1e-4 mL grid with
  // /usr/bin/python3), so 0.011 mL. The steepest 0.02 mL step there rises
  // 78 mV at the Nernst slope (same evaluation).
  const double step_ml = 0.02;
  ASSERT_TRUE(h.second->dose(4.5, 20.0).has_value());
  ASSERT_TRUE(h.second->dose(4.5, 20.0).has_value());
  double shown_ml = 9.0;
  auto last = h.sensor->read();
  ASSERT_TRUE(last.has_value());
  double best_rise_mv = -1.0;
  double best_ml = 0.0;
  while (shown_ml < 11.2) {
    ASSERT_TRUE(h.second->dose(step_ml, 5.0).has_value());
    shown_ml += step_ml;
    auto now = h.sensor->read();
    ASSERT_TRUE(now.has_value());
    EXPECT_TRUE(std::isfinite(now->potential_mv));
    // Free zinc rises past the break: the zinc electrode's potential climbs.
    const double rise = now->potential_mv - last->potential_mv;
    if (rise > best_rise_mv) {
      best_rise_mv = rise;
      best_ml = shown_ml - step_ml / 2;
    }
    last = now;
  }
  EXPECT_NEAR(best_ml, t.second_equivalence_reading_ml, 0.011);
  EXPECT_GT(best_rise_mv, 30.0);  // a real break, not noise
  // Whole motor steps of 0.001 mL: what the counter shows, 0.2 % more.
  EXPECT_NEAR(h.bench->truths().second_titrant_delivered_ml, shown_ml * 1.002, 1e-9);
}

TEST(BackTitration, EachRackVesselStartsWithoutZincAndTheLimitHoldsTheFirstReading) {
  std::string text = kBackTitration;
  text.replace(text.find(R"("metal": "zinc", "noise_mv")"), 16,
               R"("metal": "zinc", "detection_limit_mol_per_l": 1e-8,)");
  text.insert(text.rfind('}'),
              R"(, "rack": [{"position": 1}, {"position": 2, "metal_mol": 1e-4}])");
  auto s = parse_scenario(text, "back rack");
  ASSERT_TRUE(s.has_value()) << s.error().message;
  BackTitrationHost h(*s);
  ASSERT_TRUE(h.second->dose(3.0, 20.0).has_value());  // into the scenario's own vessel
  drivers::DeviceLink changer_link(h.bench->sample_changer_line(), h.clock, "changer");
  drivers::SampleChangerClient changer(changer_link);
  ASSERT_TRUE(changer.move_to(2).has_value());
  ASSERT_TRUE(changer.lower().has_value());
  ASSERT_TRUE(h.first->dose(5.0, 20.0).has_value());
  const BenchTruths t = h.bench->truths();
  EXPECT_EQ(t.position, 2);
  EXPECT_NEAR(t.second_titrant_delivered_ml, 0.0, 1e-12);
  // 5 mL x 0.0502 mol/L - 1e-4 mol nickel = 1.51e-4 mol EDTA left for
  // 0.0249 mol/L zinc, shown 0.2 % short.
  EXPECT_NEAR(t.second_equivalence_reading_ml, 1.51e-4 / 0.0249 * 1000.0 / 1.002, 1e-9);
  // No zinc yet: the electrode reads its detection limit, E0 + (S/2)
  // log10(1e-8) with S the Nernst slope at 25 °C (59.16 mV).
  auto first = h.sensor->read();
  ASSERT_TRUE(first.has_value());
  EXPECT_NEAR(first->potential_mv, 150.0 + nernst_slope_mv(25.0) / 2.0 * -8.0, 0.002);
}

TEST(BackTitration, ScenarioErrorsNameTheField) {
  const std::string base = R"({"sample": {"metal": "nickel", "metal_conc_mol_per_l": 0.01,
    "volume_ml": 25.0, "ph": 5.5, "log10_formation_constant": 18.4},
    "titrant": {"label_conc_mol_per_l": 0.05, "pka": [0.0, 1.5, 2.0, 2.69, 6.13, 10.37]})";
  auto error = [&](const std::string& extra) {
    auto s = parse_scenario(base + extra + "}", "bad.json");
    EXPECT_FALSE(s.has_value()) << extra;
    return s ? std::string() : s.error().message;
  };
  EXPECT_NE(error(R"(, "second_titrant": {"metal": "zinc", "label_conc_mol_per_l": 0.02})")
                .find("second_titrant.log10_formation_constant: missing"),
            std::string::npos);
  EXPECT_NE(error(R"(, "second_titrant": {"label_conc_mol_per_l": 0.02,
                      "log10_formation_constant": 16.5})")
                .find("second_titrant.metal"),
            std::string::npos);
  EXPECT_NE(error(R"(, "second_burette": {"cylinder_ml": 10})").find("second_burette"),
            std::string::npos);
  EXPECT_NE(error(R"(, "electrode": {"metal": "copper"})").find("electrode.metal"),
            std::string::npos);
}

}  // namespace
}  // namespace veq::simulator
