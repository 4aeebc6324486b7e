// The bench's hidden truths (blank, balance errors, indicator share, pH) and
// its physics against the chemistry engine and the textbook laws: the
// electrode and the photometer with noise off against chemistry::predict(),
// the Nernst slope, Nikolsky-Eisenman selectivity computed by hand, indirect
// indication with a copper electrode, mixing delay and stray light.
#include <gtest/gtest.h>

#include <cmath>
#include <memory>
#include <string>

#include "chemistry/constants.hpp"
#include "chemistry/prediction.hpp"
#include "drivers/auxiliary_doser_client.hpp"
#include "drivers/balance_client.hpp"
#include "drivers/burette_client.hpp"
#include "drivers/device_link.hpp"
#include "drivers/photometer_client.hpp"
#include "drivers/sensor_client.hpp"
#include "simulator/bench.hpp"
#include "simulator/builtin_scenarios.hpp"

namespace veq::simulator {
namespace {

Scenario physics_truths_demo() {
  auto s = parse_scenario(builtin_scenario("demo_calcium"), "demo");
  EXPECT_TRUE(s.has_value());
  return *s;
}

/// A scenario whose vessel is the general equilibrium engine.
Scenario general(const std::string& chemistry_json, const std::string& electrode_json = "{}") {
  const std::string text = R"({"titrant": {"name": "EDTA", "label_conc_mol_per_l": 0.05},
    "electrode": )" + electrode_json +
                           R"(, "chemistry": )" + chemistry_json + "}";
  auto s = parse_scenario(text, "test");
  EXPECT_TRUE(s.has_value()) << (s ? "" : s.error().message);
  return s ? *s : Scenario{};
}

struct PhysicsTruthsHost {
  drivers::VirtualClock clock;
  std::unique_ptr<SimulatedBench> bench;
  std::unique_ptr<drivers::DeviceLink> burette_link, sensor_link, doser_link, balance_link,
      photometer_link;
  std::unique_ptr<drivers::BuretteClient> burette;
  std::unique_ptr<drivers::PotentialSensorClient> sensor;
  std::unique_ptr<drivers::AuxiliaryDoserClient> doser;
  std::unique_ptr<drivers::BalanceClient> balance;
  std::unique_ptr<drivers::PhotometerClient> photometer;

  explicit PhysicsTruthsHost(const Scenario& s) {
    bench = std::make_unique<SimulatedBench>(s, clock);
    burette_link = std::make_unique<drivers::DeviceLink>(bench->burette_line(), clock, "burette");
    sensor_link = std::make_unique<drivers::DeviceLink>(bench->electrode_line(), clock, "sensor");
    doser_link =
        std::make_unique<drivers::DeviceLink>(bench->auxiliary_doser_line(), clock, "doser");
    balance_link = std::make_unique<drivers::DeviceLink>(bench->balance_line(), clock, "balance");
    photometer_link =
        std::make_unique<drivers::DeviceLink>(bench->photometer_line(), clock, "photometer");
    burette = std::make_unique<drivers::BuretteClient>(*burette_link);
    sensor = std::make_unique<drivers::PotentialSensorClient>(*sensor_link);
    doser = std::make_unique<drivers::AuxiliaryDoserClient>(*doser_link);
    balance = std::make_unique<drivers::BalanceClient>(*balance_link);
    photometer = std::make_unique<drivers::PhotometerClient>(*photometer_link);
  }
};

/// Volume of the steepest rise of a function on a grid (central differences).
template <class F>
double steepest_ml(F&& f, double from_ml, double to_ml, double step_ml) {
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

// ---- hidden truths ----

TEST(Truths, ABlankInTheVesselIsTitratedWithTheSample) {
  Scenario s = physics_truths_demo();
  s.sample.blank_metal_mol = 1.0e-5;  // 2 % of the sample's 5.0e-4 mol (invented)
  s.electrode.noise_mv = 0.0;
  drivers::VirtualClock clock;
  SimulatedBench bench(s, clock);
  const BenchTruths t = bench.truths();
  // Stoichiometry 1:1: (0.02 mol/L x 25 mL + 1e-5 mol) / 0.05 mol/L = 10.2 mL.
  EXPECT_NEAR(t.sample_equivalence_reading_ml, 10.0, 1e-12);
  EXPECT_NEAR(t.vessel_equivalence_reading_ml, 10.2, 1e-12);
  EXPECT_NEAR(bench.true_equivalence_reading_ml(), 10.2, 1e-12);
  EXPECT_NEAR(t.blank_metal_mol, 1.0e-5, 1e-18);
  // The electrode breaks at the vessel's equivalence, not the sample's.
  const double break_ml = steepest_ml(
      [&](double v) { return bench.electrode().equilibrium_potential_mv(v); }, 9.5, 10.6, 0.01);
  EXPECT_NEAR(break_ml, 10.2, 0.015);
}

TEST(Truths, DosedBufferCarriesMetalIntoTheVessel) {
  Scenario s = physics_truths_demo();
  s.auxiliary_doser.buffer.metal_conc_mol_per_l = 2.0e-3;  // invented trace of calcium
  s.auxiliary_doser.systematic_error_percent = 1.0;
  PhysicsTruthsHost h(s);
  ASSERT_TRUE(h.doser->add(drivers::Reagent::buffer, 5.0, 20.0).has_value());
  const BenchTruths t = h.bench->truths();
  // 5 mL asked, 5.05 mL truly pumped (1 % hidden error), times 2e-3 mol/L.
  EXPECT_NEAR(t.blank_metal_mol, 5.05e-3 * 2.0e-3, 1e-12);
  EXPECT_NEAR(t.vessel_equivalence_reading_ml, (5.0e-4 + 1.01e-5) / 0.05 * 1000.0, 1e-9);
}

TEST(Truths, BalanceOffsetAndSensitivityShowUntilTared) {
  Scenario s = physics_truths_demo();
  s.balance.noise_g = 0.0;
  s.balance.settle_time_s = 0.0;
  s.balance.offset_g = 0.0123;
  s.balance.sensitivity_error_percent = 0.1;
  s.balance.load_g = 50.0;
  PhysicsTruthsHost h(s);
  auto untared = h.balance->read();
  ASSERT_TRUE(untared.has_value());
  // 50 g x 1.001 + 0.0123 g, to the readability of 0.1 mg.
  EXPECT_NEAR(untared->mass_g, 50.0623, 1e-9);
  ASSERT_TRUE(h.balance->tare().has_value());
  h.bench->balance().place(10.0);
  auto net = h.balance->read();
  ASSERT_TRUE(net.has_value());
  EXPECT_NEAR(net->mass_g, 10.01, 1e-9);  // the offset is gone, the sensitivity is not
  EXPECT_NEAR(h.bench->truths().balance_offset_g, 0.0123, 1e-15);
}

TEST(Truths, TheHardWaterDemoHidesWhatItShould) {
  auto s = load_scenario(std::string(VEQ_SOURCE_DIR) + "/simulator/scenarios/demo_hard_water.json");
  ASSERT_TRUE(s.has_value()) << s.error().message;
  drivers::VirtualClock clock;
  SimulatedBench bench(*s, clock);
  const BenchTruths t = bench.truths();
  // Invented demo values: 50 mL of 1.8 mM Ca and 0.6 mM Mg, 4e-7 mol blank,
  // titrant 0.01986 mol/L against a label of 0.0200, burette +0.15 %.
  ASSERT_EQ(t.sample_metals_mol.size(), 2u);
  EXPECT_NEAR(t.sample_metals_mol[0].second, 9.0e-5, 1e-15);
  EXPECT_NEAR(t.sample_metals_mol[1].second, 3.0e-5, 1e-15);
  EXPECT_NEAR(t.vessel_equivalence_reading_ml, 1.204e-4 / 0.01986 * 1000.0 / 1.0015, 1e-9);
  EXPECT_EQ(t.titrant_label_conc_mol_per_l, 0.02);
  EXPECT_EQ(t.balance_offset_g, 0.0007);
}

// ---- the electrode against the chemistry engine ----

const char* kCalcium =
    R"({"sample_volume_ml": 25.0, "metals": [{"name": "Ca", "conc_mol_per_l": 0.01}],
  "ph": 10.0, "titrant": {"name": "EDTA", "conc_mol_per_l": 0.05}})";

TEST(Physics, ElectrodeMatchesThePredictedCurveWithNoiseOff) {
  Scenario s = general(kCalcium, R"({"e0_mv": 120.0, "slope_percent": 97.0, "temperature_c": 30.0,
                                     "noise_mv": 0.0, "response_time_s": 0.0})");
  auto library = chemistry::builtin_constants_library();
  ASSERT_TRUE(library.has_value());
  auto sample = chemistry::parse_sample_json(kCalcium);
  ASSERT_TRUE(sample.has_value());
  sample->signal.kind = chemistry::SignalKind::potential;
  sample->signal.standard_potential_mv = 120.0;
  sample->signal.slope_percent = 97.0;
  sample->signal.temperature_c = 30.0;
  sample->curve.end_volume_ml = 8.0;
  sample->curve.points = 81;
  chemistry::PredictionOptions options;
  options.closed_form = false;
  auto predicted = chemistry::predict(*library, *sample, options);
  ASSERT_TRUE(predicted.has_value()) << predicted.error().message;
  drivers::VirtualClock clock;
  SimulatedBench bench(s, clock);
  for (const auto& p : predicted->curve) {
    // Source: the chemistry engine's own predicted curve (same solver, same
    // constants): its pCa with the simulator's slope, to solver tolerance.
    const double slope_mv = nernst_slope_mv(30.0) * 0.97;
    EXPECT_NEAR(bench.electrode().equilibrium_potential_mv(p.volume_ml),
                120.0 - slope_mv / 2.0 * p.p_metal[0], 1e-6)
        << "at " << p.volume_ml << " mL";
    // And its potential: both take R ln10 / F from CODATA 2018 R and F.
    EXPECT_NEAR(bench.electrode().equilibrium_potential_mv(p.volume_ml) - 120.0, p.signal - 120.0,
                1e-9 * std::fabs(p.signal - 120.0) + 1e-6)
        << "at " << p.volume_ml << " mL";
  }
  // Textbook check at 0 mL: pCa = 2 and E = E0 + (S/2) log10 [Ca], S the
  // Nernst slope RT ln10 / F (60.15 mV at 30 degC; Harris, Quantitative
  // Chemical Analysis, 9th ed., section 15-1). CaOH+ takes 0.1-0.2 % of the
  // calcium at pH 10 (log *K1 about -12.8, recalled from memory): up to 0.03 mV.
  const double slope = nernst_slope_mv(30.0) * 0.97;
  EXPECT_NEAR(nernst_slope_mv(30.0), 60.15, 0.01);
  EXPECT_NEAR(bench.electrode().equilibrium_potential_mv(0.0), 120.0 - slope, 0.03);
}

TEST(Physics, ElectrodeOverTheProtocolReadsTheEngine) {
  Scenario s = general(kCalcium, R"({"noise_mv": 0.0, "response_time_s": 0.0})");
  PhysicsTruthsHost h(s);
  for (double dose : {1.0, 2.0, 1.9, 0.2}) {
    ASSERT_TRUE(h.burette->dose(dose, 20.0).has_value());
    auto r = h.sensor->read();
    ASSERT_TRUE(r.has_value());
    const double v = h.bench->burette().true_delivered_ml();
    // The reply carries three decimals.
    EXPECT_NEAR(r->potential_mv, h.bench->electrode().equilibrium_potential_mv(v), 6e-4);
  }
}

TEST(Physics, TemperatureEntersTheNernstSlope) {
  // RT ln10 / F: 59.16 mV at 25 degC, 61.54 mV at 37 degC (Harris, 9th ed.,
  // section 15-1; 37 degC value computed from CODATA R and F).
  EXPECT_NEAR(nernst_slope_mv(25.0), 59.16, 0.005);
  EXPECT_NEAR(nernst_slope_mv(37.0), 61.54, 0.005);
  Scenario cold = physics_truths_demo();
  Scenario warm = physics_truths_demo();
  cold.electrode.temperature_c = 25.0;
  warm.electrode.temperature_c = 37.0;
  drivers::VirtualClock clock;
  SimulatedBench a(cold, clock);
  SimulatedBench b(warm, clock);
  const double log_ca = std::log10(0.02);  // 1:1 model: [Ca'] before titrant
  EXPECT_NEAR(
      b.electrode().equilibrium_potential_mv(0.0) - a.electrode().equilibrium_potential_mv(0.0),
      (nernst_slope_mv(37.0) - nernst_slope_mv(25.0)) * 0.98 / 2.0 * log_ca, 1e-9);
}

// ---- Nikolsky-Eisenman selectivity ----

const char* kCalciumMagnesium = R"({"sample_volume_ml": 25.0,
  "metals": [{"name": "Ca", "conc_mol_per_l": 0.001}, {"name": "Mg", "conc_mol_per_l": 0.01}],
  "ph": 10.0, "titrant": {"name": "EDTA", "conc_mol_per_l": 0.05}})";

TEST(Physics, MagnesiumOnACalciumElectrodeFollowsNikolskyEisenman) {
  Scenario s =
      general(kCalciumMagnesium, R"({"metal": "Ca", "noise_mv": 0.0, "response_time_s": 0.0,
      "interferents": [{"metal": "Mg", "coefficient": 0.01}]})");
  Scenario ideal = general(kCalciumMagnesium, R"({"metal": "Ca", "noise_mv": 0.0})");
  drivers::VirtualClock clock;
  SimulatedBench bench(s, clock);
  SimulatedBench pure(ideal, clock);
  // The free activities from an independent model of the same sample.
  auto library = chemistry::builtin_constants_library();
  auto sample = chemistry::parse_sample_json(kCalciumMagnesium);
  ASSERT_TRUE(library && sample);
  auto model = chemistry::TitrationModel::create(*library, *sample);
  ASSERT_TRUE(model.has_value());
  const double slope = nernst_slope_mv(25.0);
  for (double v : {0.0, 0.3, 0.5, 2.0, 5.0, 5.4, 6.0}) {
    chemistry::Speciation sp;
    ASSERT_TRUE(model->solve_at(v, sp).has_value());
    const double a_ca = sp.free_mol_per_l[1];
    const double a_mg = sp.free_mol_per_l[2];
    // E = E0 + (S/z) log10(a_Ca + K a_Mg^(2/2)), written out by hand.
    const double by_hand = 150.0 + slope / 2.0 * std::log10(a_ca + 0.01 * a_mg);
    EXPECT_NEAR(bench.electrode().equilibrium_potential_mv(v), by_hand, 1e-6) << v << " mL";
  }
  // At 0 mL: log10(1e-3 + 0.01 x 1e-2) - log10(1e-3) = log10(1.1); the
  // interferent raises the potential by 29.58 x 0.0414 = 1.22 mV. MgOH+
  // holds a few % of the magnesium at pH 10 (log *K1 about -11.4, recalled
  // from memory), which lowers the rise by up to 0.06 mV.
  EXPECT_NEAR(bench.electrode().equilibrium_potential_mv(0.0) -
                  pure.electrode().equilibrium_potential_mv(0.0),
              slope / 2.0 * std::log10(1.1), 0.06);
  // Different charges: a_i + K a_j^(z_i/z_j) with z_i = 2, z_j = 1.
  EXPECT_NEAR(nikolsky_eisenman_mv(0.0, 59.16, 2, std::log10(1e-3), {0.1}, {1}, {std::log10(1e-2)}),
              59.16 / 2.0 * std::log10(1e-3 + 0.1 * 1e-4), 1e-9);
}

TEST(Physics, CopperElectrodeWithCopperEdtaFollowsCalcium) {
  // 25 mL of 0.01 mol/L Ca with 1e-4 mol/L Cu added as Cu-EDTA (2.5e-6 mol of each).
  Scenario s = general(R"({"sample_volume_ml": 25.0,
      "metals": [{"name": "Ca", "conc_mol_per_l": 0.01}, {"name": "Cu", "conc_mol_per_l": 1e-4}],
      "ph": 10.0, "buffer": {"name": "ammonia", "total_mol_per_l": 0.1},
      "titrant": {"name": "EDTA", "conc_mol_per_l": 0.05}, "premixed_titrant_mol": 2.5e-6,
      "blank_metal": "Ca"})",
                       R"({"metal": "Cu", "noise_mv": 0.0})");
  drivers::VirtualClock clock;
  SimulatedBench bench(s, clock);
  // Cu-EDTA adds as much EDTA as copper: the equivalence is the calcium's,
  // 0.01 x 25 / 0.05 = 5.00 mL.
  EXPECT_NEAR(bench.truths().vessel_equivalence_reading_ml, 5.0, 1e-12);
  const auto e = [&](double v) { return bench.electrode().equilibrium_potential_mv(v); };
  // Before the end the copper electrode reads the copper that calcium pushed
  // out of its EDTA complex; once EDTA is in excess the copper is bound again
  // and the potential falls: the break marks the calcium's equivalence.
  EXPECT_GT(e(4.0) - e(6.0), 30.0);
  EXPECT_NEAR(steepest_ml(e, 4.5, 5.5, 0.005), 5.0, 0.02);
}

// ---- indicator, pH ----

TEST(Physics, TheIndicatorHoldsSomeMetal) {
  Scenario s =
      general(R"({"sample_volume_ml": 50.0, "metals": [{"name": "Mg", "conc_mol_per_l": 0.002}],
      "ph": 10.0, "titrant": {"name": "EDTA", "conc_mol_per_l": 0.05},
      "indicator": {"name": "Eriochrome Black T", "conc_mol_per_l": 5e-5}})");
  PhysicsTruthsHost h(s);
  // Before the titrant the metal is in 40-fold excess over the indicator:
  // practically all 2.5e-6 mol of indicator is bound to it.
  const double bound0 = h.bench->truths().indicator_bound_metal_mol;
  EXPECT_GT(bound0, 0.95 * 2.5e-6);
  EXPECT_LE(bound0, 2.5e-6 * (1 + 1e-9));
  // 20 % past the equivalence (2.0 mL) EDTA has taken the metal back.
  ASSERT_TRUE(h.burette->dose(2.4, 20.0).has_value());
  EXPECT_LT(h.bench->truths().indicator_bound_metal_mol, 0.05 * 2.5e-6);
}

TEST(Physics, BaseFromTheDoserMovesThePh) {
  // Ammonia buffer 0.05 NH3 + 0.05 NH4Cl, pH from the proton balance: near
  // pKa(NH4+) = 9.24 (Harris, 9th ed., appendix G; recalled from memory).
  Scenario s =
      general(R"({"sample_volume_ml": 50.0, "metals": [{"name": "Ca", "conc_mol_per_l": 0.001}],
      "buffer": {"name": "ammonia", "total_mol_per_l": 0.05},
      "ligands": [{"name": "ammonia", "total_mol_per_l": 0.05, "protons_per_formula": 1}],
      "titrant": {"name": "EDTA", "conc_mol_per_l": 0.05}})");
  s.auxiliary_doser.water.strong_acid_mol_per_l = -0.5;  // the "water" bottle holds 0.5 M NaOH
  PhysicsTruthsHost h(s);
  const double ph0 = h.bench->truths().vessel_ph;
  EXPECT_NEAR(ph0, 9.24, 0.1);
  ASSERT_TRUE(h.doser->add(drivers::Reagent::water, 2.0, 20.0).has_value());
  // 1e-3 mol OH- turns 1e-3 mol NH4+ into NH3: ratio 3.5/1.5 mmol, so
  // pH = pKa + log10(3.5 / 1.5) = pKa + 0.368 (Henderson-Hasselbalch).
  EXPECT_NEAR(h.bench->truths().vessel_ph - ph0, std::log10(3.5 / 1.5), 0.01);
}

// ---- mixing and the photometer ----

TEST(Physics, MixingDelaysADoseAtTheElectrode) {
  Scenario s = physics_truths_demo();
  s.electrode.noise_mv = 0.0;
  s.electrode.response_time_s = 0.0;
  s.electrode.mixing_time_s = 3.0;
  PhysicsTruthsHost h(s);
  ASSERT_TRUE(h.sensor->read().has_value());
  // 4.5 mL at 40 mL/min: the mixed volume trails the dose by about
  // rate x tau = 2 mL when the motor stops.
  ASSERT_TRUE(h.burette->dose(4.5, 40.0).has_value());
  const double target =
      h.bench->electrode().equilibrium_potential_mv(h.bench->burette().true_delivered_ml());
  auto first = h.sensor->read();
  h.clock.sleep_for(std::chrono::seconds(3));
  auto later = h.sensor->read();
  h.clock.sleep_for(std::chrono::seconds(60));
  auto mixed = h.sensor->read();
  ASSERT_TRUE(first && later && mixed);
  EXPECT_GT(std::fabs(first->potential_mv - target), 0.05);
  EXPECT_LT(std::fabs(later->potential_mv - target), std::fabs(first->potential_mv - target));
  EXPECT_NEAR(mixed->potential_mv, target, 1e-3);  // 20 time constants later: mixed
}

TEST(Physics, StrayLightBendsBeerLambert) {
  // A = -log10((T + s) / (1 + s)): with A(true) = 1 and s = 1 %,
  // -log10(0.11 / 1.01) = 0.96293 (computed by hand).
  EXPECT_NEAR(with_stray_light(1.0, 0.01), 0.962928, 1e-6);
  EXPECT_NEAR(with_stray_light(0.3, 0.0), 0.3, 1e-12);
  Scenario s = physics_truths_demo();
  s.photometer.noise_absorbance = 0.0;
  s.photometer.stray_light_fraction = 0.02;
  drivers::VirtualClock clock;
  SimulatedBench bench(s, clock);
  Scenario ideal = s;
  ideal.photometer.stray_light_fraction = 0.0;
  SimulatedBench clean(ideal, clock);
  EXPECT_NEAR(bench.photometer().true_absorbance(745.0),
              with_stray_light(clean.photometer().true_absorbance(745.0), 0.02), 1e-12);
}

TEST(Physics, PhotometerMatchesThePredictedIndicatorCurve) {
  const char* sample_json = R"({"sample_volume_ml": 50.0,
      "metals": [{"name": "Mg", "conc_mol_per_l": 0.002}], "ph": 10.0,
      "titrant": {"name": "EDTA", "conc_mol_per_l": 0.05},
      "indicator": {"name": "Eriochrome Black T", "conc_mol_per_l": 5e-5}})";
  Scenario s = general(sample_json);
  s.photometer.wavelength_nm = 530.0;
  s.photometer.baseline_absorbance = 0.0;
  s.photometer.noise_absorbance = 0.0;
  auto library = chemistry::builtin_constants_library();
  auto sample = chemistry::parse_sample_json(sample_json);
  ASSERT_TRUE(library && sample);
  sample->signal.kind = chemistry::SignalKind::absorbance;
  sample->signal.wavelength_nm = 530.0;
  sample->curve.end_volume_ml = 3.0;
  sample->curve.points = 31;
  auto predicted = chemistry::predict(*library, *sample);
  ASSERT_TRUE(predicted.has_value()) << predicted.error().message;
  PhysicsTruthsHost h(s);
  ASSERT_TRUE(h.photometer->zero().has_value());  // against the sample before titrant
  const double a0 = predicted->curve.front().signal;
  double last_ml = 0.0;
  for (const auto& p : predicted->curve) {
    if (p.volume_ml > last_ml) {
      ASSERT_TRUE(h.burette->dose(p.volume_ml - last_ml, 20.0).has_value());
    }
    last_ml = p.volume_ml;
    auto r = h.photometer->read();
    ASSERT_TRUE(r.has_value());
    // Source: the engine's predicted absorbance (library absorptivities at
    // 530 nm) less the zero reference; the reply carries five decimals.
    const double v = h.bench->burette().true_delivered_ml();
    ASSERT_NEAR(v, p.volume_ml, 1e-3);
    EXPECT_NEAR(r->absorbance, p.signal - a0, 2e-3) << p.volume_ml << " mL";
  }
}

}  // namespace
}  // namespace veq::simulator
