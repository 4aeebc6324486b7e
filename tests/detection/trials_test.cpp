// Detection trials: the simulator's truth, scenario files, method specs,
// summaries, CSV and SVG.
#include <gtest/gtest.h>

#include <cmath>
#include <string>
#include <vector>

#include "chemistry/constants.hpp"
#include "chemistry/prediction.hpp"
#include "detection/trials.hpp"
#include "tests/detection/trial_support.hpp"

namespace veq::detection {
namespace {

using testing::library;

TEST(Trials, EveryBuiltInScenarioSimulates) {
  for (std::string_view name : trial_scenario_names()) {
    auto scenario = builtin_trial_scenario(name);
    ASSERT_TRUE(scenario) << name;
    EXPECT_FALSE(scenario->description.empty()) << name;
    auto c = simulate_trial_curve(*scenario, 1, library());
    ASSERT_TRUE(c) << name << ": " << c.error().message;
    EXPECT_GT(c->curve.size(), 50u) << name;
    EXPECT_EQ(c->equivalence_ml.size(), scenario->sample.metals.size()) << name;
    EXPECT_EQ(c->curve.time_s().empty(), scenario->reading_interval_s <= 0.0) << name;
  }
  auto unknown = builtin_trial_scenario("gentle_break");
  ASSERT_FALSE(unknown);
  EXPECT_NE(unknown.error().message.find("strong_break"), std::string::npos);
}

TEST(Trials, SimulationIsSeededAndItsTruthIsTheChemistry) {
  auto scenario = builtin_trial_scenario("strong_break").value();
  auto a = simulate_trial_curve(scenario, 42, library()).value();
  auto b = simulate_trial_curve(scenario, 42, library()).value();
  auto c = simulate_trial_curve(scenario, 43, library()).value();
  EXPECT_EQ(a.curve.signal(), b.curve.signal());
  EXPECT_NE(a.curve.signal(), c.curve.signal());
  // The true equivalence volume is the true metal amount over the titrant
  // concentration, within the scenario's spread of the nominal 10.0 mL.
  EXPECT_NEAR(a.equivalence_ml[0], 10.0, 10.0 * 0.05 + 1e-12);
  // Without noise and spread the curve is the engine's predicted curve
  // (pCa through E = E0 - (S/2) pCa with the Nernst slope S = R T ln(10)/F,
  // R = 8.314462618 J/(mol K) and F = 96485.33212 C/mol from CODATA 2018).
  scenario.noise = 0.0;
  scenario.amount_spread_percent = 0.0;
  scenario.electrode_zero_spread_mv = 0.0;
  scenario.sample.signal.standard_potential_mv = scenario.electrode_zero_mv;
  auto exact = simulate_trial_curve(scenario, 1, library()).value();
  auto sample = scenario.sample;
  sample.signal.kind = chemistry::SignalKind::p_metal;
  auto model = chemistry::TitrationModel::create(library(), sample).value();
  chemistry::Speciation s;
  for (std::size_t i = 0; i < exact.curve.size(); i += 17) {
    ASSERT_TRUE(model.solve_at(exact.curve.volume_ml()[i], s));
    const double nernst_mv = 1000.0 * 8.314462618 * 298.15 * std::log(10.0) / 96485.33212;
    const double expected = 150.0 - nernst_mv / 2.0 * model.p_metal(s, 0);
    EXPECT_NEAR(exact.curve.signal()[i], expected, 1e-6);
  }
  // Two metals: cumulative volumes, calcium (stronger) first.
  auto two =
      simulate_trial_curve(builtin_trial_scenario("two_metals").value(), 3, library()).value();
  ASSERT_EQ(two.equivalence_ml.size(), 2u);
  EXPECT_NEAR(two.equivalence_ml[0], 5.0, 0.26);
  EXPECT_NEAR(two.equivalence_ml[1], 10.0, 0.51);
}

TEST(Trials, SlowElectrodeLagsBehindTheChemistry) {
  // Right after the break the lagged reading is still above the settled one.
  auto scenario = builtin_trial_scenario("slow_electrode").value();
  scenario.noise = 0.0;
  scenario.drift_mv_per_min = 0.0;
  auto lagged = simulate_trial_curve(scenario, 5, library()).value();
  scenario.lag_s = 0.0;
  auto settled = simulate_trial_curve(scenario, 5, library()).value();
  ASSERT_EQ(lagged.curve.size(), settled.curve.size());
  double largest = 0.0;
  for (std::size_t i = 0; i < lagged.curve.size(); ++i)
    largest = std::max(largest, lagged.curve.signal()[i] - settled.curve.signal()[i]);
  EXPECT_GT(largest, 10.0);  // mV, on the steep part of the break
}

TEST(Trials, ScenarioJsonRoundTripAndErrors) {
  auto scenario = builtin_trial_scenario("indicator").value();
  auto back = trial_scenario_from_json(to_json(scenario));
  ASSERT_TRUE(back) << back.error().message;
  EXPECT_EQ(to_json(*back), to_json(scenario));
  // A built-in name with one field changed.
  auto edited = trial_scenario_from_json({{"name", "strong_break"}, {"noise", 0.5}});
  ASSERT_TRUE(edited);
  EXPECT_EQ(edited->noise, 0.5);
  EXPECT_EQ(edited->sample.metals[0].name, "Ca");
  auto unknown = trial_scenario_from_json({{"name", "strong_break"}, {"noize", 0.5}});
  ASSERT_FALSE(unknown);
  EXPECT_NE(unknown.error().message.find("'noize'"), std::string::npos);
  EXPECT_FALSE(trial_scenario_from_json({{"name", "strong_break"}, {"step_ml", -1}}));
  EXPECT_FALSE(trial_scenario_from_json({{"name", "strong_break"}, {"noise", "big"}}));
}

TEST(Trials, MethodSpecs) {
  auto plain = parse_trial_method("derivative");
  ASSERT_TRUE(plain);
  EXPECT_EQ(plain->method, "derivative");
  EXPECT_TRUE(plain->options.empty());
  auto with = parse_trial_method("gran:slope_mv_per_decade=29.58,sides=before");
  ASSERT_TRUE(with) << with.error().message;
  EXPECT_EQ(with->method, "gran");
  EXPECT_EQ(with->options["slope_mv_per_decade"], 29.58);
  EXPECT_EQ(with->options["sides"], "before");
  EXPECT_FALSE(parse_trial_method("steepest"));
  EXPECT_FALSE(parse_trial_method("gran:slope"));
}

TEST(Trials, EndpointsAreMatchedToTheirEquivalencePoints) {
  TrialOutcome both;
  both.equivalence_ml = {5.0, 10.0};
  both.endpoint_ml = {5.1, 9.9};
  both.uncertainty_ml = {0.1, 0.1};
  EXPECT_EQ(match_endpoints(both), (std::vector<std::ptrdiff_t>{0, 1}));
  // Only the second break found: it is scored against the second point.
  TrialOutcome second = both;
  second.endpoint_ml = {10.05};
  second.uncertainty_ml = {0.01};
  EXPECT_EQ(match_endpoints(second), (std::vector<std::ptrdiff_t>{-1, 0}));
  const auto summary = summarise_trials("second only", std::vector<TrialOutcome>{second});
  ASSERT_EQ(summary.size(), 2u);
  EXPECT_EQ(summary[0].found, 0u);
  EXPECT_EQ(summary[1].found, 1u);
  EXPECT_NEAR(summary[1].bias_percent, 0.5, 1e-9);
  EXPECT_EQ(summary[1].coverage, 0.0);  // 0.05 mL off with 2u = 0.02 mL
}

TEST(Trials, SummaryCsvAndSvg) {
  auto scenario = builtin_trial_scenario("strong_break").value();
  std::vector<TrialCurve> curves;
  for (std::uint64_t seed = 1; seed <= 8; ++seed)
    curves.push_back(simulate_trial_curve(scenario, seed, library()).value());
  const auto derivative =
      run_trials(curves, parse_trial_method("derivative").value(), scenario.sample, library());
  const auto model =
      run_trials(curves, parse_trial_method("model").value(), scenario.sample, library());
  ASSERT_EQ(model.size(), 8u);
  const auto summary = summarise_trials("model", model);
  ASSERT_EQ(summary.size(), 1u);
  EXPECT_EQ(summary[0].curves, 8u);
  EXPECT_EQ(summary[0].found, 8u);
  EXPECT_LT(std::abs(summary[0].bias_percent), 0.01);
  EXPECT_GE(summary[0].coverage, 0.5);
  // Bias, scatter and coverage from the outcomes themselves.
  double sum = 0.0;
  for (const auto& o : model)
    sum += 100.0 * (o.endpoint_ml[0] - o.equivalence_ml[0]) / o.equivalence_ml[0];
  EXPECT_NEAR(summary[0].bias_percent, sum / 8.0, 1e-12);
  const std::vector<std::string> labels = {"derivative", "model"};
  const std::vector<std::vector<TrialOutcome>> all = {derivative, model};
  const std::string csv = trials_csv(labels, all);
  EXPECT_EQ(csv.substr(0, csv.find('\n')),
            "method,seed,endpoint,true_ml,endpoint_ml,uncertainty_ml,error_ml,error_percent,"
            "within_2u,flags");
  EXPECT_EQ(std::count(csv.begin(), csv.end(), '\n'), 1 + 16);
  const std::string svg = trials_svg("strong_break", labels, all);
  EXPECT_EQ(svg.rfind("<svg", 0), 0u);
  EXPECT_NE(svg.find("</svg>"), std::string::npos);
  EXPECT_NE(svg.find("derivative"), std::string::npos);
  EXPECT_NE(svg.find("within 2u"), std::string::npos);
  // A method that fails on every curve is counted, not hidden.
  const auto failing = run_trials(curves, parse_trial_method("crossing").value(), scenario.sample,
                                  library());  // no level given
  const auto failed = summarise_trials("crossing", failing);
  EXPECT_EQ(failed[0].failed, 8u);
  EXPECT_EQ(failed[0].found, 0u);
}

}  // namespace
}  // namespace veq::detection
