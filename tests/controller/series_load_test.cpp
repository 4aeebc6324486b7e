// Several instruments running series at once, each on its own thread with
// its own simulated rack and its own connection to one shared SQLite file:
// every result must equal that of the same series run alone, and no point
// may be lost. The long load (16 instruments, a simulated day, memory) is
// bench/controller/load_bench.cpp.
#include <gtest/gtest.h>

#include <cstdint>
#include <filesystem>
#include <memory>
#include <string>
#include <thread>
#include <vector>

#include <nlohmann/json.hpp>

#include "tests/controller/series_bench.hpp"

namespace veq::series {
namespace {

namespace fs = std::filesystem;
using testing::SeriesBench;

void replace_all(std::string& text, const std::string& from, const std::string& to) {
  for (std::size_t at = text.find(from); at != std::string::npos;
       at = text.find(from, at + to.size()))
    text.replace(at, from.size(), to);
}

/// Calibration, titer and one sample in duplicate: enough to carry results
/// from entry to entry through the store, small enough for a unit test.
const char* kShortSeries = R"(
[series]
name = Birchfield wells, load test
[calibration]
electrode = calcium electrode 1
standards = 0.0001, 0.001, 0.01 mol/L
positions = 2, 3, 4
[titer]
titrant = EDTA 0.01 mol/L
method = calcium in well water
standard molar mass = 100.0869 g/mol
purity = 99.95 %
masses = 0.01500, 0.01480, 0.01520 g
positions = 6, 7, 8
[sample]
id = well 1
method = calcium in well water
positions = 11, 12
aliquots = 50 mL
)";

class CountingObserver final : public SeriesObserver {
 public:
  void on_point(const store::PointRecord&) override { ++points; }
  std::int64_t points = 0;
};

/// One instrument: its own seed, and its own names for everything the store
/// keeps by name (method, titrant, electrode): titers and calibrations are
/// looked up by titrant and electrode name, so instruments sharing a file
/// must not share those names.
struct Instrument {
  std::unique_ptr<SeriesBench> bench;
  std::string method, series;
  CountingObserver observer;
  SeriesOutcome outcome;

  Instrument(int index, const std::string& db) {
    auto scenario = nlohmann::json::parse(testing::kScenario);
    scenario["seed"] = 1000 + 17 * index;
    bench = std::make_unique<SeriesBench>(scenario.dump(), db);
    const std::string suffix = " at bench " + std::to_string(index + 1);
    method = testing::kMethod;
    series = kShortSeries;
    for (std::string* text : {&method, &series}) {
      replace_all(*text, "calcium in well water", "calcium in well water" + suffix);
      replace_all(*text, "EDTA 0.01 mol/L", "EDTA 0.01 mol/L" + suffix);
      replace_all(*text, "calcium electrode 1", "calcium electrode 1" + suffix);
    }
    auto m = method::parse_method(method, "load test method");
    EXPECT_TRUE(m.has_value()) << (m ? "" : m.error().message);
    EXPECT_TRUE(method::save_method(*bench->store, *m).has_value());
    store::TitrantRecord t;
    t.name = "EDTA 0.01 mol/L" + suffix;
    t.nominal_conc_mol_per_l = 0.0100;
    t.lot = "lot 26-118";
    t.prepared_utc = "2026-11-30T08:00:00.000Z";
    EXPECT_TRUE(bench->store->save_titrant(t).has_value());
  }
  void run() { outcome = bench->run(series, &observer); }
};

struct TempFiles {
  fs::path dir;
  TempFiles() {
    dir = fs::temp_directory_path() / "veq-series-load-test";
    fs::remove_all(dir);
    fs::create_directories(dir);
  }
  ~TempFiles() { fs::remove_all(dir); }
  std::string db(const std::string& name) const { return (dir / name).string(); }
};

TEST(SeriesLoad, FourInstrumentsOnOneFileGiveTheirAloneResultsAndLoseNoPoint) {
  constexpr int kInstruments = 4;
  TempFiles files;
  // A connection each (processes of their own would do the same): SQLite's
  // file lock between them, and opening the file while another instrument
  // runs leaves its run alone (its owner is alive). The shared connection
  // of one process is the load bench's case.
  std::vector<std::unique_ptr<Instrument>> shared;
  for (int i = 0; i < kInstruments; ++i)
    shared.push_back(std::make_unique<Instrument>(i, files.db("lab.sqlite")));
  {
    std::vector<std::thread> threads;
    for (auto& in : shared)
      threads.emplace_back([&in] { in->run(); });
    for (auto& t : threads)
      t.join();
  }

  for (int i = 0; i < kInstruments; ++i) {
    SCOPED_TRACE("instrument " + std::to_string(i + 1));
    const auto& together = *shared[static_cast<std::size_t>(i)];
    ASSERT_EQ(together.outcome.status, store::SeriesStatus::completed) << together.outcome.reason;
    // The same instrument, seed and series alone on a fresh file.
    Instrument alone(i, files.db("alone-" + std::to_string(i) + ".sqlite"));
    alone.run();
    ASSERT_EQ(alone.outcome.status, store::SeriesStatus::completed) << alone.outcome.reason;
    ASSERT_EQ(together.outcome.entries.size(), alone.outcome.entries.size());
    for (std::size_t e = 0; e < alone.outcome.entries.size(); ++e) {
      const auto& a = together.outcome.entries[e];
      const auto& b = alone.outcome.entries[e];
      EXPECT_EQ(a.label, b.label);
      EXPECT_EQ(a.status, b.status) << a.note;
      // Exact equality: in virtual time a series is deterministic for its
      // scenario and seed, however many run beside it (ARCHITECTURE.md,
      // "Time and threads"); another instrument's writes must not change it.
      EXPECT_EQ(a.values, b.values) << a.label;
      EXPECT_EQ(a.mean, b.mean) << a.label;
      EXPECT_EQ(a.run_ids.size(), b.run_ids.size()) << a.label;
    }
    EXPECT_EQ(together.observer.points, alone.observer.points);
    // No point lost: every listed run's stored points equal its point_count.
    for (const auto& e : together.outcome.entries) {
      for (auto id : e.run_ids) {
        auto run = together.bench->store->load_run(id);
        auto points = together.bench->store->load_points(id);
        ASSERT_TRUE(run.has_value() && points.has_value());
        EXPECT_EQ(static_cast<std::int64_t>(points->size()), run->point_count) << "run " << id;
        EXPECT_EQ(run->status, store::RunStatus::completed) << "run " << id;
      }
    }
  }
  // And overall: the shared file holds every point the observers saw.
  std::int64_t seen = 0;
  for (const auto& in : shared)
    seen += in->observer.points;
  auto runs = shared.front()->bench->store->list_runs();
  ASSERT_TRUE(runs.has_value());
  std::int64_t stored = 0;
  for (const auto& r : *runs) {
    auto points = shared.front()->bench->store->load_points(r.id);
    ASSERT_TRUE(points.has_value());
    stored += static_cast<std::int64_t>(points->size());
    EXPECT_NE(r.status, store::RunStatus::interrupted) << "run " << r.id;
  }
  EXPECT_GT(seen, 0);
  EXPECT_EQ(stored, seen);
}

}  // namespace
}  // namespace veq::series
