// CSV curves: column mapping and line-numbered errors; import stores all or nothing.
#include <gtest/gtest.h>

#include "controller/curve_csv.hpp"
#include "controller/store/sqlite_store.hpp"

namespace veq::controller {
namespace {

TEST(CurveCsv, ReadsDefaultColumnsInAnyOrderWithComments) {
  auto c = parse_curve_csv(
      "# exported by hand\nsignal,time_s,volume_ml\n-10.5,0,0.00\n-11.0,8,0.05\n\n-13.25,16,0.10\n",
      "a.csv");
  ASSERT_TRUE(c.has_value()) << c.error().message;
  ASSERT_EQ(c->volume_ml.size(), 3u);
  EXPECT_DOUBLE_EQ(c->volume_ml[2], 0.10);
  EXPECT_DOUBLE_EQ(c->signal[2], -13.25);
  EXPECT_DOUBLE_EQ(c->time_s[1], 8.0);
  EXPECT_TRUE(c->temperature_c.empty());
}

TEST(CurveCsv, MapsOtherColumnNamesAndSeparators) {
  CsvColumns columns;
  columns.volume = "V";
  columns.signal = "E";
  auto c = parse_curve_csv("V;E\n0;1\n0.1;2\n0.2;4\n", "b.csv", columns);
  ASSERT_TRUE(c.has_value()) << c.error().message;
  EXPECT_DOUBLE_EQ(c->signal[2], 4.0);
}

TEST(CurveCsv, ErrorsNameTheFileAndLine) {
  struct Case {
    const char* text;
    const char* says;
  } cases[] = {
      {"volume_ml,signal\n0,1\n0.1,2\n0.05,3\n", "b.csv: line 4: volume goes backwards"},
      {"volume_ml,signal\n0,1\n0.1,nan\n0.2,3\n", "line 3: 'nan' in column 'signal'"},
      {"volume_ml,signal\n0,1\n0.1,inf\n0.2,3\n", "line 3: 'inf' in column 'signal'"},
      {"volume_ml,signal\n0,1\n0.1\n0.2,3\n", "line 3: column 'signal' is missing"},
      {"volume_ml,signal\n0,1\n0.1,2.5x\n", "line 3: '2.5x'"},
      {"volume,signal\n0,1\n", "line 1: no column named 'volume_ml'"},
      {"volume_ml,signal\n-0.1,1\n0,1\n0.1,1\n", "line 2: volume -0.1 mL is negative"},
      {"volume_ml,signal\n0,1\n0.1,2\n", "only 2 data rows"},
      {"", "empty file"},
  };
  for (const auto& c : cases) {
    auto r = parse_curve_csv(c.text, "b.csv");
    ASSERT_FALSE(r.has_value()) << c.text;
    EXPECT_NE(r.error().message.find(c.says), std::string::npos) << r.error().message;
  }
}

TEST(CurveCsv, EqualVolumesAreMergedIntoOnePoint) {
  auto c = parse_curve_csv("volume_ml,signal\n0,1\n0.1,2\n0.1,4\n0.2,5\n", "c.csv");
  ASSERT_TRUE(c.has_value());
  auto curve = to_curve(*c, detection::SignalKind::potential_mv, 25.0);
  ASSERT_TRUE(curve.has_value()) << curve.error().message;
  EXPECT_EQ(curve->size(), 3u);
}

TEST(ImportRun, AllPointsInOneTransactionOrNone) {
  auto store = std::move(store::SqliteStore::open(":memory:")).value();
  store::NewRun run;
  run.sample_id = "imported";
  run.method_name = "imported curve";
  run.method_json = "{}";
  std::vector<store::PointRecord> points(3);
  for (int i = 0; i < 3; ++i)
    points[static_cast<std::size_t>(i)].index = i;
  auto id = store->import_run(run, points, "x.csv");
  ASSERT_TRUE(id.has_value()) << id.error().message;
  EXPECT_EQ(store->load_run(*id)->status, store::RunStatus::imported);
  EXPECT_EQ(store->load_points(*id)->size(), 3u);
  // A duplicate point index fails the third insert: nothing of that run stays.
  points[2].index = 1;
  auto failed = store->import_run(run, points, "y.csv");
  ASSERT_FALSE(failed.has_value());
  EXPECT_EQ(store->list_runs()->size(), 1u);
}

}  // namespace
}  // namespace veq::controller
