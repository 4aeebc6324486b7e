// A rack of vessels on one simulated bench: lowering the sample changer's
// head at a position makes the sensors read that vessel (titrant and
// reagents counted from that moment), standards hold mass * purity / M, an
// on_balance vessel receives the burette on the balance, and rack errors in
// a scenario name the field.
#include <gtest/gtest.h>

#include <cmath>
#include <memory>
#include <string>

#include "drivers/balance_client.hpp"
#include "drivers/burette_client.hpp"
#include "drivers/device_link.hpp"
#include "drivers/sample_changer_client.hpp"
#include "drivers/sensor_client.hpp"
#include "simulator/bench.hpp"

namespace veq::simulator {
namespace {

// Invented demo rack (calcium in waters, a calcium carbonate standard and a
// burette check); the 1:1 constants are the demo scenario's.
constexpr const char* kRack = R"({
  "seed": 11,
  "sample": {"metal": "calcium", "metal_conc_mol_per_l": 0.02, "volume_ml": 25.0, "ph": 10.0,
             "log10_formation_constant": 10.65},
  "titrant": {"name": "EDTA", "label_conc_mol_per_l": 0.05,
              "pka": [0.0, 1.5, 2.0, 2.69, 6.13, 10.37]},
  "burette": {"cylinder_ml": 50.0, "max_dose_ml": 20.0},
  "electrode": {"noise_mv": 0.0, "response_time_s": 0.0},
  "balance": {"noise_g": 0.0, "settle_time_s": 0.0},
  "sample_changer": {"positions": 8, "lift_time_s": 2.0, "blocked_position": 7},
  "rack": [
    {"position": 1, "label": "tap water A", "metal_conc_mol_per_l": 0.012},
    {"position": 2, "label": "well water", "metal_mol": 3.0e-4, "volume_ml": 50.0,
     "blank_metal_mol": 1.0e-6},
    {"position": 3, "label": "calcium carbonate", "mass_g": 0.0501, "purity_percent": 99.95,
     "volume_ml": 50.0},
    {"position": 5, "label": "burette check", "on_balance": true}
  ]
})";

Scenario rack_scenario() {
  auto s = parse_scenario(kRack, "rack");
  EXPECT_TRUE(s.has_value()) << (s ? "" : s.error().message);
  return s ? *s : Scenario{};
}

struct RackHost {
  drivers::VirtualClock clock;
  std::unique_ptr<SimulatedBench> bench;
  std::unique_ptr<drivers::DeviceLink> burette_link, sensor_link, balance_link, changer_link;
  std::unique_ptr<drivers::BuretteClient> burette;
  std::unique_ptr<drivers::PotentialSensorClient> sensor;
  std::unique_ptr<drivers::BalanceClient> balance;
  std::unique_ptr<drivers::SampleChangerClient> changer;

  explicit RackHost(const Scenario& s) {
    bench = std::make_unique<SimulatedBench>(s, clock);
    burette_link = std::make_unique<drivers::DeviceLink>(bench->burette_line(), clock, "burette");
    sensor_link = std::make_unique<drivers::DeviceLink>(bench->electrode_line(), clock, "sensor");
    balance_link = std::make_unique<drivers::DeviceLink>(bench->balance_line(), clock, "balance");
    changer_link =
        std::make_unique<drivers::DeviceLink>(bench->sample_changer_line(), clock, "changer");
    burette = std::make_unique<drivers::BuretteClient>(*burette_link);
    sensor = std::make_unique<drivers::PotentialSensorClient>(*sensor_link);
    balance = std::make_unique<drivers::BalanceClient>(*balance_link);
    changer = std::make_unique<drivers::SampleChangerClient>(*changer_link);
  }

  /// Raises the head (if down), carries it to a position and lowers it.
  void dip_into(int position) {
    ASSERT_TRUE(changer->raise().has_value());
    auto moved = changer->move_to(position);
    ASSERT_TRUE(moved.has_value()) << moved.error().message;
    ASSERT_TRUE(changer->lower().has_value());
  }
};

/// Volume of the steepest fall of the noise-free potential (mV) on a grid.
double rack_steepest_ml(const SimulatedBench& bench, double from_ml, double to_ml, double step_ml) {
  auto& e = const_cast<SimulatedBench&>(bench).electrode();
  double best = from_ml;
  double best_slope = -1.0;
  for (double v = from_ml + step_ml; v < to_ml; v += step_ml) {
    const double slope = std::fabs(e.equilibrium_potential_mv(v + step_ml / 2) -
                                   e.equilibrium_potential_mv(v - step_ml / 2));
    if (slope > best_slope) {
      best_slope = slope;
      best = v;
    }
  }
  return best;
}

TEST(Rack, EachLoweredPositionGivesItsOwnCurve) {
  RackHost h(rack_scenario());
  struct Expected {
    int position;
    double equivalence_ml;  // stoichiometry 1:1: metal (+ blank) mol / 0.05 mol/L
  };
  const Expected cases[] = {
      {1, 6.0},         // 0.012 mol/L x 25 mL / 0.05 mol/L
      {2, 6.02},        // (3.0e-4 + 1.0e-6 blank) mol / 0.05 mol/L
      {3, 10.0062945},  // standard: 0.0501 g x 0.9995 / 100.0869 g/mol / 0.05 mol/L
      {4, 10.0},        // not in the rack: the scenario's own 0.02 mol/L x 25 mL
  };
  for (const Expected& c : cases) {
    h.dip_into(c.position);
    EXPECT_EQ(h.bench->position(), c.position);
    const BenchTruths t = h.bench->truths();
    EXPECT_EQ(t.position, c.position);
    EXPECT_NEAR(t.vessel_equivalence_reading_ml, c.equivalence_ml, 1e-6);
    // The electrode breaks at the vessel's equivalence: a 0.005 mL grid and
    // the 1:1 inflection, which lies within 1e-4 mL of the equivalence for
    // K' = 10^10.2 (the closed form's asymmetry at these concentrations).
    EXPECT_NEAR(rack_steepest_ml(*h.bench, c.equivalence_ml - 1.0, c.equivalence_ml + 1.0, 0.005),
                c.equivalence_ml, 0.006)
        << "position " << c.position;
  }
}

TEST(Rack, TitrantAndSensorsCountFromTheLowering) {
  RackHost h(rack_scenario());
  h.dip_into(1);
  ASSERT_TRUE(h.burette->dose(4.0, 20.0).has_value());
  EXPECT_NEAR(h.bench->truths().titrant_delivered_ml, 4.0, 1e-9);
  auto before = h.sensor->read();
  ASSERT_TRUE(before.has_value());
  h.dip_into(2);
  // The fresh vessel has no titrant yet: the electrode reads its start.
  EXPECT_NEAR(h.bench->truths().titrant_delivered_ml, 0.0, 1e-12);
  auto fresh = h.sensor->read();
  ASSERT_TRUE(fresh.has_value());
  EXPECT_NEAR(fresh->potential_mv, h.bench->electrode().equilibrium_potential_mv(0.0), 1e-3);
  // Free calcium (stoichiometry; the complex's dissociation is below 1e-7
  // of it at K' = 10^10.13): the new vessel's 3.01e-4 mol in 50 mL against
  // the old one's 3e-4 - 2e-4 mol left in 29 mL, at the Nernst slope / 2
  // (29.58 mV): 29.58 x log10(6.02e-3 / 3.448e-3) = 7.158 mV higher.
  EXPECT_NEAR(fresh->potential_mv - before->potential_mv, 7.158, 0.002);
  ASSERT_TRUE(h.burette->dose(3.0, 20.0).has_value());
  EXPECT_NEAR(h.bench->truths().titrant_delivered_ml, 3.0, 1e-9);
  auto dosed = h.sensor->read();
  ASSERT_TRUE(dosed.has_value());
  EXPECT_NEAR(dosed->potential_mv, h.bench->electrode().equilibrium_potential_mv(3.0), 1e-3);
}

TEST(Rack, StandardPositionsHoldMassTimesPurityOverMolarMass) {
  RackHost h(rack_scenario());
  const PositionTruths t = h.bench->position_truths(3);
  EXPECT_TRUE(t.in_rack);
  EXPECT_TRUE(t.standard);
  EXPECT_EQ(t.label, "calcium carbonate");
  ASSERT_EQ(t.metals_mol.size(), 1u);
  // 0.0501 g x 99.95 % / 100.0869 g/mol (CaCO3 from the IUPAC standard
  // atomic weights; recalled from memory) = 5.003147e-4 mol.
  EXPECT_NEAR(t.metals_mol[0].second, 5.003147e-4, 1e-10);
  EXPECT_NEAR(t.equivalence_reading_ml, 10.0062945, 1e-6);
  const PositionTruths sample = h.bench->position_truths(2);
  ASSERT_EQ(sample.metals_mol.size(), 1u);
  EXPECT_NEAR(sample.metals_mol[0].second, 3.0e-4, 1e-15);
  EXPECT_NEAR(sample.blank_metal_mol, 1.0e-6, 1e-18);
  const PositionTruths own = h.bench->position_truths(6);
  EXPECT_FALSE(own.in_rack);
  ASSERT_EQ(own.metals_mol.size(), 1u);
  EXPECT_NEAR(own.metals_mol[0].second, 0.02 * 25.0 / 1000.0, 1e-15);
  EXPECT_TRUE(h.bench->position_truths(5).metals_mol.empty());
}

TEST(Rack, AnOnBalanceVesselWeighsWhatTheBuretteDelivers) {
  RackHost h(rack_scenario());
  h.dip_into(5);
  ASSERT_TRUE(h.balance->tare().has_value());
  ASSERT_TRUE(h.burette->dose(10.0, 20.0).has_value());
  auto weighed = h.balance->read();
  ASSERT_TRUE(weighed.has_value());
  // 10 mL of water at 0.99820 g/mL (20 °C; CRC Handbook density of water
  // table, recalled from memory), to the balance's 0.1 mg.
  EXPECT_NEAR(weighed->mass_g, 9.9820, 0.00006);
  EXPECT_TRUE(h.bench->truths().sample_metals_mol.empty());
  // The vessel stays on the balance; titrant into another vessel does not.
  h.dip_into(1);
  ASSERT_TRUE(h.burette->dose(2.0, 20.0).has_value());
  auto after = h.balance->read();
  ASSERT_TRUE(after.has_value());
  EXPECT_NEAR(after->mass_g, 9.9820, 0.00006);
}

TEST(Rack, ABlockedPositionStillStopsTheHeadShort) {
  RackHost h(rack_scenario());
  auto blocked = h.changer->move_to(8);  // position 7 is in the way
  ASSERT_FALSE(blocked.has_value());
  ASSERT_TRUE(h.changer->stop().has_value());
  ASSERT_TRUE(h.changer->lower().has_value());
  EXPECT_EQ(h.bench->position(), 6);
  EXPECT_NEAR(h.bench->truths().sample_equivalence_reading_ml, 10.0, 1e-9);
}

TEST(Rack, WithoutARackLoweringChangesNothing) {
  auto s = parse_scenario(kRack, "rack");
  ASSERT_TRUE(s.has_value());
  s->rack.clear();
  RackHost h(*s);
  ASSERT_TRUE(h.burette->dose(2.0, 20.0).has_value());
  h.dip_into(3);
  EXPECT_EQ(h.bench->position(), 0);
  EXPECT_NEAR(h.bench->truths().titrant_delivered_ml, 2.0, 1e-9);
}

// ---- scenario errors name the field ----

std::string rack_error(const std::string& rack, const std::string& extra = "") {
  const std::string text = R"({"sample": {"metal_conc_mol_per_l": 0.02, "volume_ml": 25.0,
    "log10_formation_constant": 10.65}, "titrant": {"label_conc_mol_per_l": 0.05,
    "pka": [0.0, 1.5, 2.0, 2.69, 6.13, 10.37]}, "sample_changer": {"positions": 6},
    "rack": )" + rack + extra +
                           "}";
  auto s = parse_scenario(text, "bad.json");
  EXPECT_FALSE(s.has_value());
  return s ? std::string() : s.error().message;
}

TEST(RackErrors, NameTheFieldAndThePosition) {
  {
    const std::string e = rack_error(R"([{"position": 1}, {"position": 2}, {"position": 9}])");
    EXPECT_NE(e.find("rack[2].position"), std::string::npos) << e;
    EXPECT_NE(e.find("from 1 to 6"), std::string::npos) << e;
  }
  EXPECT_NE(rack_error(R"([{"position": 1.5}])").find("rack[0].position"), std::string::npos);
  EXPECT_NE(rack_error(R"([{"label": "x"}])").find("rack[0].position: missing"), std::string::npos);
  EXPECT_NE(rack_error(R"([{"position": 2}, {"position": 2}])").find("already in the rack"),
            std::string::npos);
  EXPECT_NE(rack_error(R"([{"position": 1, "metal_mol": 1e-4, "metal_conc_mol_per_l": 0.01}])")
                .find("not both"),
            std::string::npos);
  EXPECT_NE(
      rack_error(R"([{"position": 1, "mass_g": 0.1, "metal_mol": 1e-4}])").find("rack[0].mass_g"),
      std::string::npos);
  EXPECT_NE(rack_error(R"([{"position": 1, "purity_percent": 99}])")
                .find("rack[0].purity_percent: belongs to a standard"),
            std::string::npos);
  EXPECT_NE(rack_error(R"([{"position": 1, "ph": 15}])").find("rack[0].ph"), std::string::npos);
  EXPECT_NE(
      rack_error(R"([{"position": 1, "on_balance": true, "metal_mol": 1e-4}])").find("water only"),
      std::string::npos);
  EXPECT_NE(rack_error(R"({"position": 1})").find("rack: must be a list"), std::string::npos);
  EXPECT_NE(rack_error(R"([{"position": 1, "chemistry": {"sample_volume_ml": 25,
    "metals": [{"name": "Unobtainium", "conc_mol_per_l": 0.01}], "ph": 10}}])")
                .find("rack[0]"),
            std::string::npos);
}

}  // namespace
}  // namespace veq::simulator
