// Two metals in one vessel, titrated at two pH values: the general
// equilibrium engine with a fixed pH that the doser's acid and base move
// through the vessel's buffer capacity. Iron(III) reacts with EDTA at pH 2,
// zinc only once the pH is raised to 5.5; an iron(III) electrode shows both
// breaks (at pH 5.5 the iron-EDTA complex sets the free iron by the free
// EDTA, which the zinc holds down until its endpoint).
#include <gtest/gtest.h>

#include <cmath>
#include <memory>
#include <string>

#include "drivers/auxiliary_doser_client.hpp"
#include "drivers/device_link.hpp"
#include "simulator/bench.hpp"
#include "simulator/vessel.hpp"
#include "simulator/virtual_electrode.hpp"

namespace veq::simulator {
namespace {

// Invented scenario: 50 mL of a pickling-bath rinse with 1.00 mmol/L Fe(III)
// and 1.20 mmol/L Zn in a vessel buffered at pH 2.0 with 2e-4 mol per pH unit. Constants: the
// shipped library (chemistry/data/constants.json, Harris 8th ed., Table
// 11-2, and Martell and Smith for the protonated complexes and hydrolysis).
const char* kScenario = R"json({"seed": 5,
  "titrant": {"name": "EDTA", "label_conc_mol_per_l": 0.01, "true_conc_mol_per_l": 0.01},
  "sample": {"buffer_capacity_mol_per_ph": 2.0e-4},
  "electrode": {"metal": "Fe(III)", "noise_mv": 0.0, "response_time_s": 0.0, "reports_ph": true},
  "auxiliary_doser": {"base": {"strong_acid_mol_per_l": -1.0}},
  "chemistry": {"sample_volume_ml": 50.0, "ph": 2.0,
    "metals": [{"name": "Fe(III)", "conc_mol_per_l": 0.001},
               {"name": "Zn", "conc_mol_per_l": 0.0012}],
    "blank_metal": "Zn"}})json";

template <typename F>
double two_stage_steepest_ml(F&& f, double from_ml, double to_ml, double step_ml) {
  double best = from_ml;
  double best_slope = -1.0;
  for (double v = from_ml + step_ml; v < to_ml; v += step_ml) {
    const double slope = std::fabs(f(v + step_ml / 2) - f(v - step_ml / 2));
    if (slope > best_slope) {
      best_slope = slope;
      best = v;
    }
  }
  return best;
}

struct TwoStageHost {
  drivers::VirtualClock clock;
  std::unique_ptr<SimulatedBench> bench;
  std::unique_ptr<drivers::DeviceLink> doser_link;
  std::unique_ptr<drivers::AuxiliaryDoserClient> doser;

  explicit TwoStageHost(const std::string& text) {
    auto s = parse_scenario(text, "two stages");
    EXPECT_TRUE(s.has_value()) << (s ? "" : s.error().message);
    bench = std::make_unique<SimulatedBench>(*s, clock);
    doser_link =
        std::make_unique<drivers::DeviceLink>(bench->auxiliary_doser_line(), clock, "doser");
    doser = std::make_unique<drivers::AuxiliaryDoserClient>(*doser_link);
    EXPECT_TRUE(doser->identify().has_value());
  }
};

TEST(TwoStages, BaseFromTheDoserMovesTheFixedPhOfTheGeneralEngine) {
  TwoStageHost h(kScenario);
  EXPECT_NEAR(h.bench->truths().vessel_ph, 2.0, 1e-12);
  // 0.7 mL of 1 mol/L base = 7e-4 mol over 2e-4 mol/pH: 2.0 + 3.5 = 5.5.
  ASSERT_TRUE(h.doser->add(drivers::Reagent::base, 0.7, 10.0).has_value());
  EXPECT_NEAR(h.bench->truths().vessel_ph, 5.5, 1e-9);
}

TEST(TwoStages, EachMetalBreaksAtItsOwnPh) {
  TwoStageHost h(kScenario);
  const auto e = [&](double v) { return h.bench->electrode().equilibrium_potential_mv(v); };
  // Hidden truths: Fe 1.00e-3 x 50 / 0.01 = 5.00 mL; Zn 1.20e-3 x 50 / 0.01
  // = 6.00 mL more.
  // At pH 2 only iron reacts: log K'(FeY) about 11.5 against about 4.1 for
  // zinc (log K 25.1 and 16.5 with their MHY complexes, alpha(Y4-) 10^-13.4
  // at pH 2: Harris 8th ed., Table 11-2 and Section 11-2).
  EXPECT_NEAR(two_stage_steepest_ml(e, 3.0, 7.5, 0.002), 5.0, 0.01);
  EXPECT_GT(e(4.5) - e(5.5), 50.0);  // the break: tens of mV at 19.7 mV per decade of Fe3+
  // No second break at pH 2 where the zinc's would be.
  EXPECT_LT(std::fabs(e(10.5) - e(11.5)), 10.0);
  ASSERT_TRUE(h.doser->add(drivers::Reagent::base, 0.7, 10.0).has_value());
  // At pH 5.5 zinc takes the EDTA: the break at the sum, 11.00 mL of
  // titrant in the vessel (the first stage's included).
  EXPECT_NEAR(two_stage_steepest_ml(e, 7.0, 13.0, 0.002), 11.0, 0.01);
  EXPECT_GT(e(10.5) - e(11.5), 50.0);
}

TEST(TwoStages, TheRackPositionReportsEachMetalsTruth) {
  std::string text = kScenario;
  // The same vessel as a rack position with its own chemistry section.
  text.insert(text.rfind('}'),
              R"json(, "sample_changer": {"positions": 4}, "rack": [{"position": 2,
                 "label": "rinse 7", "buffer_capacity_mol_per_ph": 2.0e-4,
                 "chemistry": {"sample_volume_ml": 50.0, "ph": 2.0,
                   "metals": [{"name": "Fe(III)", "conc_mol_per_l": 0.0009},
                              {"name": "Zn", "conc_mol_per_l": 0.0015}],
                   "blank_metal": "Zn"}}])json");
  TwoStageHost h(text);
  const PositionTruths t = h.bench->position_truths(2);
  ASSERT_EQ(t.metals_mol.size(), 2u);
  EXPECT_EQ(t.metals_mol[0].first, "Fe(III)");
  EXPECT_NEAR(t.metals_mol[0].second, 4.5e-5, 1e-15);
  EXPECT_EQ(t.metals_mol[1].first, "Zn");
  EXPECT_NEAR(t.metals_mol[1].second, 7.5e-5, 1e-15);
}

TEST(TwoStages, ABufferCapacityNeedsAFixedPh) {
  std::string text = kScenario;
  text.replace(text.find("\"ph\": 2.0,"), 10, "");
  auto s = parse_scenario(text, "two stages");
  ASSERT_FALSE(s.has_value());
  EXPECT_NE(s.error().message.find("buffer_capacity_mol_per_ph needs a fixed"), std::string::npos)
      << s.error().message;
}

}  // namespace
}  // namespace veq::simulator
