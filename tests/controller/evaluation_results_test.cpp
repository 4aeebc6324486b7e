// A run's results from the evaluation a reviewer chose: new records, equal to
// the titration's own formula at the chosen endpoint.
#include <gtest/gtest.h>

#include <filesystem>
#include <string>
#include <utility>
#include <vector>

#include "controller/evaluation_results.hpp"
#include "controller/store/sqlite_store.hpp"
#include "controller/titration.hpp"

namespace veq::controller {
namespace {

namespace fs = std::filesystem;

struct StoredRun {
  fs::path dir;
  std::unique_ptr<store::SqliteStore> store;
  std::int64_t run_id = 0;
  std::int64_t first_evaluation = 0;
  SampleDescription sample;

  /// `method_json`: the titration settings the run stored.
  explicit StoredRun(const std::string& method_json = "{}") {
    dir = fs::temp_directory_path() /
          ("veq-evaluation-results-" +
           std::string(::testing::UnitTest::GetInstance()->current_test_info()->name()));
    fs::remove_all(dir);
    fs::create_directories(dir);
    store = std::move(store::SqliteStore::open((dir / "runs.sqlite").string()).value());
    // Calcium in 50.00 mL of water against 0.0100 mol/L EDTA (1:1), as a
    // titration stores it: one evaluation and four results from it.
    sample.sample_volume_ml = 50.0;
    sample.titrant_conc_mol_per_l = 0.0100;
    store::NewRun run;
    run.sample_id = "spring";
    run.method_json = method_json;
    run.sample_volume_ml = sample.sample_volume_ml;
    run.titrant_conc_mol_per_l = sample.titrant_conc_mol_per_l;
    run_id = store->begin_run(run).value();
    first_evaluation = evaluate(8.4265);
    const auto r = compute_metal_result(8.4265, sample).value();
    add(first_evaluation, "endpoint_volume", r.endpoint_ml, "mL");
    add(first_evaluation, "metal_amount", r.amount_mmol, "mmol");
    add(first_evaluation, "metal_concentration", r.conc_mmol_per_l, "mmol/L");
    add(first_evaluation, "metal_mass_concentration", r.conc_mg_per_l, "mg/L");
    EXPECT_TRUE(store->finish_run(run_id, store::RunStatus::completed, "done").has_value());
  }
  ~StoredRun() {
    store.reset();
    fs::remove_all(dir);
  }
  /// An evaluation with these endpoints (volume mL, steepness mV/mL).
  std::int64_t evaluate_breaks(const std::vector<std::pair<double, double>>& breaks) {
    store::EvaluationRecord e;
    e.method = "segments";
    e.options_json = "{}";
    for (const auto& [volume, steepness] : breaks)
      e.endpoints.push_back(store::EndpointRecord{volume, 0.002, -39.0, steepness, ""});
    return store->add_evaluation(run_id, e).value();
  }
  std::int64_t evaluate(std::optional<double> endpoint_ml) {
    store::EvaluationRecord e;
    e.method = endpoint_ml ? "gran" : "derivative";
    e.options_json = "{}";
    if (endpoint_ml)
      e.endpoints.push_back(store::EndpointRecord{*endpoint_ml, 0.002, -39.0, 2600.0, ""});
    return store->add_evaluation(run_id, e).value();
  }
  void add(std::int64_t evaluation, const char* name, double value, const char* unit) {
    store::ResultRecord r;
    r.run_id = run_id;
    r.evaluation_id = evaluation;
    r.name = name;
    r.value = value;
    r.unit = unit;
    ASSERT_TRUE(store->add_result(r).has_value());
  }
};

double value_of(const std::vector<store::ResultRecord>& rows, const std::string& name) {
  for (const auto& r : rows)
    if (r.name == name)
      return r.value;
  ADD_FAILURE() << "no result " << name;
  return 0.0;
}

TEST(EvaluationResults, AChosenEvaluationGetsItsOwnResultRecords) {
  StoredRun run;
  const auto second = run.evaluate(8.4264);
  auto added = add_results_for_evaluation(*run.store, run.run_id, second);
  ASSERT_TRUE(added.has_value()) << added.error().message;
  ASSERT_EQ(added->size(), 4u);
  // By hand: 8.4264 mL x 0.0100 mmol/mL = 0.084264 mmol in 50.00 mL,
  // 1.68528 mmol/L, times 40.078 g/mol (IUPAC standard atomic weight of
  // calcium, the default of SampleDescription) = 67.54265 mg/L.
  EXPECT_NEAR(value_of(*added, "endpoint_volume"), 8.4264, 1e-12);
  EXPECT_NEAR(value_of(*added, "metal_amount"), 0.084264, 1e-12);
  EXPECT_NEAR(value_of(*added, "metal_concentration"), 1.68528, 1e-11);
  EXPECT_NEAR(value_of(*added, "metal_mass_concentration"), 1.68528 * 40.078, 1e-9);
  // The same as the titration's own formula at that endpoint.
  const auto direct = compute_metal_result(8.4264, run.sample).value();
  EXPECT_NEAR(value_of(*added, "metal_mass_concentration"), direct.conc_mg_per_l,
              1e-12 * direct.conc_mg_per_l);
  for (const auto& r : *added)
    EXPECT_EQ(r.evaluation_id, second);

  // Nothing stored is changed: the first evaluation's results stay, and
  // asking again adds nothing.
  auto all = run.store->load_results(run.run_id);
  ASSERT_TRUE(all.has_value());
  EXPECT_EQ(all->size(), 8u);
  EXPECT_NEAR(value_of(*all, "metal_amount"), 0.084265, 1e-12);  // the first row of that name
  auto again = add_results_for_evaluation(*run.store, run.run_id, second);
  ASSERT_TRUE(again.has_value());
  EXPECT_EQ(again->size(), 4u);
  EXPECT_EQ(run.store->load_results(run.run_id)->size(), 8u);
}

TEST(EvaluationResults, AnEvaluationWithoutEndpointOrOfAnotherRunIsRefusedByName) {
  StoredRun run;
  const auto empty = run.evaluate(std::nullopt);
  auto refused = add_results_for_evaluation(*run.store, run.run_id, empty);
  ASSERT_FALSE(refused.has_value());
  EXPECT_NE(refused.error().message.find("found no endpoint"), std::string::npos)
      << refused.error().message;
  auto unknown = add_results_for_evaluation(*run.store, run.run_id, 999);
  ASSERT_FALSE(unknown.has_value());
  EXPECT_NE(unknown.error().message.find("evaluation 999 is not an evaluation of run"),
            std::string::npos)
      << unknown.error().message;
  EXPECT_EQ(run.store->load_results(run.run_id)->size(), 4u);
}

TEST(EvaluationResults, ARunWithTwoEndpointsTakesTheSteepestTwoInVolumeOrder) {
  // A run that expected two endpoints (copper, then magnesium: 8.4265 and
  // 12.0000 mL stored). The chosen evaluation found three breaks; as the run
  // itself does (controller/titration.cpp), the two steepest are its
  // endpoints in volume order, and the small step at 3 mL is not.
  StoredRun run(R"({"endpoint_count": 2})");
  run.add(run.first_evaluation, "endpoint_volume_2", 12.0, "mL");
  const auto chosen = run.evaluate_breaks({{3.0, 50.0}, {8.5, 2600.0}, {12.2, 1800.0}});
  auto added = add_results_for_evaluation(*run.store, run.run_id, chosen);
  ASSERT_TRUE(added.has_value()) << added.error().message;
  ASSERT_EQ(added->size(), 5u);
  EXPECT_DOUBLE_EQ(value_of(*added, "endpoint_volume"), 8.5);
  EXPECT_DOUBLE_EQ(value_of(*added, "endpoint_volume_2"), 12.2);
  // The first endpoint's results follow it: 8.5 mL x 0.0100 mol/L (by hand).
  EXPECT_NEAR(value_of(*added, "metal_amount"), 0.085, 1e-12);
  // An evaluation with one break of the two the run expects gives none.
  const auto one = run.evaluate_breaks({{8.5, 2600.0}});
  auto refused = add_results_for_evaluation(*run.store, run.run_id, one);
  ASSERT_FALSE(refused.has_value());
  EXPECT_NE(refused.error().message.find("found 1 of the 2 endpoints the run expects"),
            std::string::npos)
      << refused.error().message;
  EXPECT_EQ(run.store->load_results(run.run_id)->size(), 10u);
}

TEST(EvaluationResults, TheEvaluationsADeterminationRestsOnAreReadFromItsDetail) {
  // As the series runner writes them (traceability.evaluations), one per
  // titration run of the determination; entries that are not a run and an
  // evaluation are left out, and a detail without them gives none.
  const std::vector<EvaluationUsed> two = {{12, 31}, {13, 34}};
  EXPECT_EQ(evaluations_used(R"({"traceability": {"evaluations": [{"run": 12, "evaluation": 31},
            {"run": 13, "evaluation": 34}, {"run": "x", "evaluation": 1}, {"run": 0,
            "evaluation": 0}]}})"),
            two);
  EXPECT_TRUE(evaluations_used(R"({"traceability": {"runs": [12, 0]}})").empty());
  EXPECT_TRUE(evaluations_used("not json").empty());
  EXPECT_TRUE(evaluations_used(R"([1, 2])").empty());
}

}  // namespace
}  // namespace veq::controller
