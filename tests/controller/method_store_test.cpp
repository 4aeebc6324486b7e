// Methods, titrants, titers and calibrations in the SQLite store: versions
// frozen once used (by the API and by triggers), the migration from schema 2
// to 3 leaving runs and points exactly as they were, append-only histories.
#include <gtest/gtest.h>
#include <sqlite3.h>

#include <cstring>
#include <filesystem>
#include <string>
#include <vector>

#include "controller/method/method_file.hpp"
#include "controller/method/readiness.hpp"
#include "controller/method/stored_methods.hpp"
#include "controller/method/titer.hpp"
#include "controller/store/sqlite_store.hpp"
#include "tests/controller/raw_sql.hpp"

namespace veq::store {
namespace {

namespace fs = std::filesystem;

struct TempDir {
  fs::path path;
  TempDir() {
    path = fs::temp_directory_path() /
           ("veq-method-store-test-" +
            std::to_string(::testing::UnitTest::GetInstance()->random_seed()) + "-" +
            ::testing::UnitTest::GetInstance()->current_test_info()->name());
    fs::remove_all(path);
    fs::create_directories(path);
  }
  ~TempDir() { fs::remove_all(path); }
  std::string file(const char* name) const { return (path / name).string(); }
};

/// Runs SQL on a raw connection (no veq code), returns the SQLite code.
using veq::store::testing::exec_raw;

method::Method hardness() {
  return method::read_method_file(std::string(VEQ_SOURCE_DIR) +
                                  "/docs/examples/tap-water-hardness.method")
      .value();
}

NewRun a_run() {
  NewRun r;
  r.sample_id = "tap 3";
  r.method_name = "tap water total hardness";
  r.method_json = "{}";
  r.sample_volume_ml = 50.0;
  r.titrant_name = "EDTA 0.01 mol/L";
  r.titrant_conc_mol_per_l = 0.01;
  return r;
}

TEST(MethodStore, SavingAChangedMethodMakesTheNextVersion) {
  TempDir dir;
  auto store = SqliteStore::open(dir.file("m.sqlite")).value();
  auto first = method::save_method(*store, hardness());
  ASSERT_TRUE(first.has_value()) << first.error().message;
  EXPECT_EQ(first->version, 1);
  // Unchanged: no new version.
  auto same = method::save_method(*store, hardness());
  ASSERT_TRUE(same.has_value());
  EXPECT_EQ(same->version, 1);
  auto changed = hardness();
  changed.replicates = 3;
  auto second = method::save_method(*store, changed);
  ASSERT_TRUE(second.has_value());
  EXPECT_EQ(second->version, 2);
  auto versions = store->list_method_versions("tap water total hardness").value();
  ASSERT_EQ(versions.size(), 2u);
  auto loaded = method::load_method(*store, "tap water total hardness", 1).value();
  EXPECT_EQ(loaded.replicates, 2);
  EXPECT_EQ(loaded, *first);
  auto latest = method::load_method(*store, "tap water total hardness").value();
  EXPECT_EQ(latest.version, 2);
  EXPECT_EQ(latest.replicates, 3);
  EXPECT_EQ(store->list_method_names().value(),
            std::vector<std::string>{"tap water total hardness"});
  // An invalid method is refused before anything is stored.
  auto bad = hardness();
  bad.steps.erase(bad.steps.begin() + 3);  // the titrate step
  EXPECT_FALSE(method::save_method(*store, bad).has_value());
  EXPECT_EQ(store->list_method_versions("tap water total hardness")->size(), 2u);
}

TEST(MethodStore, AVersionUsedByARunCannotChange) {
  TempDir dir;
  const std::string path = dir.file("m.sqlite");
  auto store = SqliteStore::open(path).value();
  ASSERT_TRUE(method::save_method(*store, hardness()).has_value());
  const std::string original = store->load_method_version("tap water total hardness", 1)->text;
  // An unused version may still be corrected in place.
  ASSERT_TRUE(store->replace_method_version("tap water total hardness", 1, original + "\n"));
  ASSERT_TRUE(store->replace_method_version("tap water total hardness", 1, original));
  const auto run = store->begin_run(a_run()).value();
  ASSERT_TRUE(store->record_method_use(run, "tap water total hardness", 1));
  EXPECT_TRUE(store->load_method_version("tap water total hardness", 1)->used);
  auto refused = store->replace_method_version("tap water total hardness", 1, "changed");
  ASSERT_FALSE(refused.has_value());
  EXPECT_NE(refused.error().message.find("has been used by a run and cannot change"),
            std::string::npos);
  // Past the API: the triggers refuse too.
  std::string error;
  EXPECT_NE(exec_raw(path, "UPDATE method_versions SET text = 'x'", &error), SQLITE_OK);
  EXPECT_NE(error.find("a method version used by a run cannot be changed"), std::string::npos)
      << error;
  EXPECT_NE(exec_raw(path, "DELETE FROM method_versions", &error), SQLITE_OK);
  EXPECT_NE(error.find("cannot be deleted"), std::string::npos) << error;
  EXPECT_NE(exec_raw(path, "DELETE FROM method_uses", &error), SQLITE_OK);
  EXPECT_NE(exec_raw(path, "UPDATE method_uses SET version = 2", &error), SQLITE_OK);
  EXPECT_EQ(store->load_method_version("tap water total hardness", 1)->text, original);
  // A use of a version that does not exist is refused.
  EXPECT_FALSE(store->record_method_use(run, "tap water total hardness", 9).has_value());
}

TEST(MethodStore, TitrantsTitersAndCalibrations) {
  TempDir dir;
  const std::string path = dir.file("m.sqlite");
  auto store = SqliteStore::open(path).value();
  TitrantRecord edta{"EDTA 0.01 mol/L", 0.01, "lot 7", "2026-11-20T09:00:00.000Z"};
  ASSERT_TRUE(store->save_titrant(edta));
  EXPECT_FALSE(store->save_titrant(TitrantRecord{"bad", 0.0, "", ""}).has_value());
  const auto when = method::parse_utc("2026-12-01T08:00:00Z").value();
  auto refused = method::record_titer(*store, edta.name, {0.01000, 0.01005, 0.00995}, when);
  ASSERT_TRUE(refused.has_value()) << refused.error().message;
  EXPECT_FALSE(refused->accepted);
  auto accepted = method::record_titer(*store, edta.name, {0.010012, 0.010018, 0.010009}, when);
  ASSERT_TRUE(accepted.has_value());
  EXPECT_TRUE(accepted->accepted);
  auto history = store->titer_history(edta.name).value();
  ASSERT_EQ(history.size(), 2u);
  EXPECT_FALSE(history[0].accepted);
  EXPECT_EQ(history[1].determinations_mol_per_l,
            (std::vector<double>{0.010012, 0.010018, 0.010009}));
  EXPECT_EQ(history[1].lot, "lot 7");
  EXPECT_EQ(history[1].expires_utc, "2026-12-08T08:00:00.000Z");
  // The store refuses an accepted titer from fewer than three determinations.
  TiterRecord two = history[1];
  two.determinations_mol_per_l = {0.01, 0.01};
  EXPECT_FALSE(store->add_titer(two).has_value());
  // A titer of a titrant that is not registered is refused.
  TiterRecord stray = history[1];
  stray.titrant = "unknown";
  EXPECT_FALSE(store->add_titer(stray).has_value());

  CalibrationRecord cal;
  cal.electrode = "divalent cation electrode 1";
  cal.slope_mv_per_decade = 28.9;
  cal.e0_mv = 112.0;
  cal.temperature_c = 25.0;
  cal.accepted = true;
  cal.measured_utc = "2026-12-01T07:00:00.000Z";
  cal.expires_utc = "2026-12-02T07:00:00.000Z";
  ASSERT_TRUE(store->add_calibration(cal).has_value());
  auto cals = store->calibration_history(cal.electrode).value();
  ASSERT_EQ(cals.size(), 1u);
  EXPECT_DOUBLE_EQ(cals[0].slope_mv_per_decade, 28.9);
  EXPECT_EQ(cals[0].expires_utc, cal.expires_utc);

  // Histories are append-only.
  std::string error;
  for (const char* sql :
       {"UPDATE titers SET conc_mol_per_l = 0.02", "DELETE FROM titers",
        "UPDATE titer_determinations SET conc_mol_per_l = 0.02", "DELETE FROM titer_determinations",
        "UPDATE calibrations SET accepted = 1", "DELETE FROM calibrations"}) {
    EXPECT_NE(exec_raw(path, sql, &error), SQLITE_OK) << sql;
  }

  // The method's readiness, read from the store.
  auto ready =
      method::check_ready(hardness(), *store, method::parse_utc("2026-12-01T12:00:00Z").value());
  ASSERT_TRUE(ready.has_value()) << ready.error().message;
  EXPECT_NEAR(ready->titers[0].conc_mol_per_l, 0.010013, 1e-12);
  auto late =
      method::check_ready(hardness(), *store, method::parse_utc("2026-12-03T12:00:00Z").value());
  ASSERT_FALSE(late.has_value());
  EXPECT_NE(late.error().message.find("expired at 2026-12-02T07:00:00.000Z"), std::string::npos)
      << late.error().message;
}

/// Every row of a table, each column as its SQLite type and exact bytes.
std::vector<std::string> dump_table(const std::string& path, const std::string& table) {
  sqlite3* db = nullptr;
  sqlite3_open(path.c_str(), &db);
  sqlite3_stmt* s = nullptr;
  const std::string sql = "SELECT * FROM " + table + " ORDER BY 1, 2";
  EXPECT_EQ(sqlite3_prepare_v2(db, sql.c_str(), -1, &s, nullptr), SQLITE_OK) << sql;
  std::vector<std::string> rows;
  while (sqlite3_step(s) == SQLITE_ROW) {
    std::string row;
    for (int c = 0; c < sqlite3_column_count(s); ++c) {
      const int type = sqlite3_column_type(s, c);
      row += std::to_string(type) + ":";
      if (type == SQLITE_FLOAT) {
        const double v = sqlite3_column_double(s, c);
        char bytes[sizeof v];
        std::memcpy(bytes, &v, sizeof v);
        row.append(bytes, sizeof v);
      } else {
        const auto* p = static_cast<const char*>(sqlite3_column_blob(s, c));
        row.append(p ? p : "", static_cast<std::size_t>(sqlite3_column_bytes(s, c)));
      }
      row += "|";
    }
    rows.push_back(row);
  }
  sqlite3_finalize(s);
  sqlite3_close(db);
  return rows;
}

TEST(MethodStore, MigrationFromSchemaTwoKeepsRunsAndPointsExactly) {
  TempDir dir;
  const std::string path = dir.file("old.sqlite");
  // A schema-2 file as veq wrote it before this migration existed.
  std::string sql = std::string("BEGIN;") + schema_migration_sql(1) + schema_migration_sql(2) +
                    "PRAGMA user_version = 2; PRAGMA application_id = 1986359585; COMMIT;";
  ASSERT_EQ(exec_raw(path, sql), SQLITE_OK);
  ASSERT_EQ(exec_raw(path,
                     "INSERT INTO runs (sample_id, method_name, method_json, signal_kind, "
                     "sample_volume_ml, titrant_conc_mol_per_l, software_version, started_utc, "
                     "finished_utc, status, end_reason) VALUES "
                     "('well 1', 'old method', '{\"a\":1}', 1, 25.0, 0.05, '0.1', "
                     "'2026-11-01T10:00:00.000Z', '2026-11-01T10:20:00.000Z', 2, 'done'), "
                     "('well 2', 'old method', '{}', 1, 0.1, 0.1, '0.1', "
                     "'2026-11-01T11:00:00.000Z', '', 1, '');"
                     "INSERT INTO points VALUES (1, 0, 0.0, 0.0, -101.25, 25.0, 0.1, 3.0), "
                     "(1, 1, 10.5, 0.1, -99.875, 25.1, 0.3, 4.5), "
                     "(1, 2, 21.0, 0.30000000000000004, -80.0625, 25.05, 0.2, 5.0), "
                     "(2, 0, 0.0, 0.0, 1e-300, -0.0, 0.0, 0.0);"
                     "INSERT INTO run_events VALUES (1, 0, 0.0, 0, 1, 'start', "
                     "'2026-11-01T10:00:00.000Z');"),
            SQLITE_OK);
  const auto points_before = dump_table(path, "points");
  const auto events_before = dump_table(path, "run_events");
  ASSERT_EQ(points_before.size(), 4u);

  {
    auto store = SqliteStore::open(path);
    ASSERT_TRUE(store.has_value()) << store.error().message;
    EXPECT_EQ((*store)->schema_version().value(),
              kSchemaVersion);  // through every migration since 2
    // Run 2 was left "running": marked interrupted on open, as always.
    EXPECT_EQ((*store)->interrupted_on_open(), 1);
    EXPECT_EQ((*store)->load_run(1)->end_reason, "done");
    EXPECT_TRUE(method::save_method(**store, hardness()).has_value());
  }
  EXPECT_EQ(dump_table(path, "points"), points_before);
  EXPECT_EQ(dump_table(path, "run_events"), events_before);
  // The run columns other than the interrupted one's status are unchanged.
  auto runs = dump_table(path, "runs");
  ASSERT_EQ(runs.size(), 2u);
  EXPECT_NE(runs[0].find("done"), std::string::npos);

  std::string error;
  EXPECT_NE(exec_raw(path, "UPDATE points SET signal = 0", &error), SQLITE_OK);
  EXPECT_NE(error.find("raw points cannot be changed"), std::string::npos) << error;
  EXPECT_NE(exec_raw(path, "DELETE FROM points", &error), SQLITE_OK);
  EXPECT_NE(error.find("raw points cannot be deleted"), std::string::npos) << error;
  EXPECT_EQ(dump_table(path, "points"), points_before);

  // Opening again does not migrate again.
  auto again = SqliteStore::open(path);
  ASSERT_TRUE(again.has_value());
  EXPECT_EQ((*again)->list_method_versions("tap water total hardness")->size(), 1u);
}

TEST(MethodStore, MigrationInterruptedLeavesSchemaTwo) {
  TempDir dir;
  const std::string path = dir.file("clash.sqlite");
  // A schema-2 file holding a table that migration 3 wants to create: the
  // migration fails, is rolled back, and the file stays at schema 2.
  std::string sql = std::string("BEGIN;") + schema_migration_sql(1) + schema_migration_sql(2) +
                    "CREATE TABLE titrants (x INTEGER);"
                    "PRAGMA user_version = 2; PRAGMA application_id = 1986359585; COMMIT;";
  ASSERT_EQ(exec_raw(path, sql), SQLITE_OK);
  auto store = SqliteStore::open(path);
  ASSERT_FALSE(store.has_value());
  EXPECT_NE(store.error().message.find("migration to schema 3 failed"), std::string::npos);
  sqlite3* db = nullptr;
  sqlite3_open(path.c_str(), &db);
  sqlite3_stmt* s = nullptr;
  sqlite3_prepare_v2(db, "SELECT COUNT(*) FROM sqlite_schema WHERE name = 'methods'", -1, &s,
                     nullptr);
  ASSERT_EQ(sqlite3_step(s), SQLITE_ROW);
  EXPECT_EQ(sqlite3_column_int(s, 0), 0);
  sqlite3_finalize(s);
  sqlite3_prepare_v2(db, "PRAGMA user_version", -1, &s, nullptr);
  ASSERT_EQ(sqlite3_step(s), SQLITE_ROW);
  EXPECT_EQ(sqlite3_column_int(s, 0), 2);
  sqlite3_finalize(s);
  sqlite3_close(db);
}

}  // namespace
}  // namespace veq::store
