// Export of stored runs as CSV and JSON: a run titrated on the simulated
// bench goes out and is read back, by veq's own curve reader for the points
// and by a plain RFC 4180 reader for the other tables.
#include <gtest/gtest.h>

#include <algorithm>
#include <cmath>
#include <filesystem>
#include <sstream>
#include <string>
#include <vector>

#include "controller/cli/run_export.hpp"
#include "controller/curve_csv.hpp"
#include "tests/controller/simulated_trial.hpp"

namespace veq::cli {
namespace {

using controller::testing::demo_scenario;
using controller::testing::Trial;

/// RFC 4180 fields of CSV text: quoted fields may hold commas, doubled
/// quotes and line breaks. Kept apart from the exporter on purpose.
std::vector<std::vector<std::string>> read_csv(const std::string& text) {
  std::vector<std::vector<std::string>> rows(1);
  std::string field;
  bool quoted = false, row_open = false;
  for (std::size_t i = 0; i < text.size(); ++i) {
    const char c = text[i];
    if (quoted) {
      if (c == '"' && i + 1 < text.size() && text[i + 1] == '"') {
        field += '"';
        ++i;
      } else if (c == '"') {
        quoted = false;
      } else {
        field += c;
      }
    } else if (c == '"') {
      quoted = true;
      row_open = true;
    } else if (c == ',') {
      rows.back().push_back(field);
      field.clear();
      row_open = true;
    } else if (c == '\n') {
      rows.back().push_back(field);
      field.clear();
      rows.emplace_back();
      row_open = false;
    } else {
      field += c;
      row_open = true;
    }
  }
  if (row_open)
    rows.back().push_back(field);
  if (rows.back().empty())
    rows.pop_back();
  return rows;
}

/// The exporter prints 10 significant digits: the value read back is within
/// half a unit of the 10th digit.
double printed_tolerance(double value) {
  return 5e-10 * std::abs(value) + 1e-300;
}

class Export : public ::testing::Test {
 protected:
  void SetUp() override {
    trial_ = std::make_unique<Trial>(demo_scenario());
    trial_->sample.sample_id = "well \"north\", tap 2";  // a comma and quotes to escape
    const auto outcome = trial_->run();
    ASSERT_EQ(outcome.status, store::RunStatus::completed) << outcome.reason;
    run_id_ = outcome.run_id;
    auto points = trial_->store->load_points(run_id_);
    ASSERT_TRUE(points.has_value());
    points_ = *points;
    ASSERT_GT(points_.size(), 20u);
  }
  store::RunStore& store() { return *trial_->store; }

  std::unique_ptr<Trial> trial_;
  std::int64_t run_id_ = 0;
  std::vector<store::PointRecord> points_;
};

TEST_F(Export, PointsCsvReadsBackThroughTheCurveReader) {
  auto csv = export_csv(store(), {run_id_}, ExportTable::points);
  ASSERT_TRUE(csv.has_value()) << csv.error().message;
  EXPECT_EQ(csv->substr(0, csv->find('\n')),
            "run_id,index,time_s,volume_ml,signal,signal_unit,temperature_c,drift_per_min,"
            "settle_s");
  // The columns `veq import` reads by default: one run's export imports as it is.
  auto curve = controller::parse_curve_csv(*csv, "export.csv");
  ASSERT_TRUE(curve.has_value()) << curve.error().message;
  ASSERT_EQ(curve->volume_ml.size(), points_.size());
  for (std::size_t i = 0; i < points_.size(); ++i) {
    EXPECT_NEAR(curve->volume_ml[i], points_[i].volume_ml, printed_tolerance(points_[i].volume_ml))
        << "row " << i;
    EXPECT_NEAR(curve->signal[i], points_[i].signal, printed_tolerance(points_[i].signal));
    EXPECT_NEAR(curve->time_s[i], points_[i].time_s, printed_tolerance(points_[i].time_s));
    EXPECT_NEAR(curve->temperature_c[i], points_[i].temperature_c,
                printed_tolerance(points_[i].temperature_c));
  }
  const auto rows = read_csv(*csv);
  ASSERT_EQ(rows.size(), points_.size() + 1);
  EXPECT_EQ(rows[1][5], "mV");
  EXPECT_NEAR(std::stod(rows.back()[7]), points_.back().drift_per_min,
              printed_tolerance(points_.back().drift_per_min));
}

TEST_F(Export, ResultsEvaluationsAndRunsCsv) {
  auto results = store().load_results(run_id_);
  ASSERT_TRUE(results.has_value());
  ASSERT_FALSE(results->empty());
  auto csv = export_csv(store(), {run_id_}, ExportTable::results);
  ASSERT_TRUE(csv.has_value());
  const auto rows = read_csv(*csv);
  ASSERT_EQ(rows.size(), results->size() + 1);
  EXPECT_EQ(rows[0], (std::vector<std::string>{"run_id", "evaluation_id", "result_id", "name",
                                               "value", "unit"}));
  for (std::size_t i = 0; i < results->size(); ++i) {
    EXPECT_EQ(rows[i + 1][3], (*results)[i].name);
    EXPECT_NEAR(std::stod(rows[i + 1][4]), (*results)[i].value,
                printed_tolerance((*results)[i].value));
    EXPECT_EQ(rows[i + 1][5], (*results)[i].unit);
  }

  auto evaluations = store().load_evaluations(run_id_);
  ASSERT_TRUE(evaluations.has_value());
  std::size_t endpoints = 0;
  for (const auto& e : *evaluations)
    endpoints += std::max<std::size_t>(1, e.endpoints.size());
  auto ecsv = export_csv(store(), {run_id_}, ExportTable::evaluations);
  ASSERT_TRUE(ecsv.has_value());
  const auto erows = read_csv(*ecsv);
  ASSERT_EQ(erows.size(), endpoints + 1);
  // The options are JSON with commas and quotes: one field all the same.
  for (std::size_t i = 1; i < erows.size(); ++i)
    ASSERT_EQ(erows[i].size(), erows[0].size()) << "row " << i;
  const auto& first = evaluations->front();
  ASSERT_FALSE(first.endpoints.empty());
  EXPECT_EQ(erows[1][11], first.options_json);
  EXPECT_NEAR(std::stod(erows[1][6]), first.endpoints[0].volume_ml,
              printed_tolerance(first.endpoints[0].volume_ml));

  auto rcsv = export_csv(store(), {run_id_}, ExportTable::runs);
  ASSERT_TRUE(rcsv.has_value());
  const auto rrows = read_csv(*rcsv);
  ASSERT_EQ(rrows.size(), 2u);
  EXPECT_EQ(rrows[1][1], "well \"north\", tap 2");
  EXPECT_EQ(rrows[1][3], "completed");
  EXPECT_EQ(std::stoll(rrows[1][12]), static_cast<long long>(points_.size()));
}

TEST_F(Export, JsonHasOneObjectPerRunAndKeepsEveryDigit) {
  // A second run, so that "one object per run" is seen.
  Trial second(demo_scenario());
  second.store = std::move(trial_->store);
  second.sample.sample_id = "second";
  const auto outcome = second.run();
  ASSERT_EQ(outcome.status, store::RunStatus::completed) << outcome.reason;
  trial_->store = std::move(second.store);

  auto ids = all_run_ids(store());
  ASSERT_TRUE(ids.has_value());
  ASSERT_EQ(ids->size(), 2u);
  auto json = export_json(store(), *ids);
  ASSERT_TRUE(json.has_value()) << json.error().message;
  const auto back = nlohmann::json::parse(json->dump());
  ASSERT_TRUE(back.is_array());
  ASSERT_EQ(back.size(), 2u);
  EXPECT_EQ(back[0]["run_id"], run_id_);
  EXPECT_EQ(back[1]["sample_id"], "second");
  const auto& points = back[0]["points"];
  ASSERT_EQ(points.size(), points_.size());
  for (std::size_t i = 0; i < points_.size(); ++i) {
    // nlohmann prints the shortest text that reads back to the same double.
    EXPECT_EQ(points[i]["volume_ml"].get<double>(), points_[i].volume_ml);
    EXPECT_EQ(points[i]["signal"].get<double>(), points_[i].signal);
    EXPECT_EQ(points[i]["time_s"].get<double>(), points_[i].time_s);
  }
  auto results = store().load_results(run_id_);
  ASSERT_TRUE(results.has_value());
  ASSERT_EQ(back[0]["results"].size(), results->size());
  EXPECT_EQ(back[0]["results"][0]["value"].get<double>(), results->front().value);
  EXPECT_TRUE(back[0]["method"].is_object());
  EXPECT_FALSE(back[0]["evaluations"].empty());
}

TEST_F(Export, UnknownRunAndUnwritablePathAreClearErrors) {
  auto csv = export_csv(store(), {run_id_, 999}, ExportTable::points);
  ASSERT_FALSE(csv.has_value());
  EXPECT_EQ(csv.error().kind, ErrorKind::not_found);
  EXPECT_NE(csv.error().message.find("no run 999"), std::string::npos) << csv.error().message;
  auto json = export_json(store(), {999});
  ASSERT_FALSE(json.has_value());
  EXPECT_EQ(json.error().kind, ErrorKind::not_found);

  const std::string path = "/nonexistent-folder-of-veq/out.csv";
  auto w = write_text_file(path, "x\n");
  ASSERT_FALSE(w.has_value());
  EXPECT_EQ(w.error().kind, ErrorKind::io);
  EXPECT_NE(w.error().message.find(path), std::string::npos) << w.error().message;
  EXPECT_FALSE(std::filesystem::exists(path));
}

}  // namespace
}  // namespace veq::cli
