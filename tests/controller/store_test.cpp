// The SQLite run store: schema, migrations, append-only raw points, refusal
// of foreign and newer files without touching them.
#include <gtest/gtest.h>
#include <sqlite3.h>

#include <filesystem>
#include <fstream>

#include <sys/wait.h>
#include <unistd.h>

#include "controller/store/sqlite_store.hpp"
#include "tests/controller/raw_sql.hpp"

namespace veq::store {
namespace {

namespace fs = std::filesystem;

struct TempDir {
  fs::path path;
  TempDir() {
    path = fs::temp_directory_path() /
           ("veq-store-test-" + std::to_string(::testing::UnitTest::GetInstance()->random_seed()) +
            "-" + ::testing::UnitTest::GetInstance()->current_test_info()->name());
    fs::remove_all(path);
    fs::create_directories(path);
  }
  ~TempDir() { fs::remove_all(path); }
  std::string file(const char* name) const { return (path / name).string(); }
};

NewRun sample_run() {
  NewRun r;
  r.sample_id = "well-7";
  r.method_name = "test method";
  r.method_json = "{}";
  r.sample_volume_ml = 25.0;
  r.titrant_name = "EDTA";
  r.titrant_conc_mol_per_l = 0.05;
  r.burette = "burette 1 on /dev/ttyUSB3";
  return r;
}

using veq::store::testing::exec_raw;

TEST(SqliteStore, CreatesSchemaAndRoundTripsARun) {
  TempDir dir;
  auto store = SqliteStore::open(dir.file("a.sqlite"));
  ASSERT_TRUE(store.has_value()) << store.error().message;
  EXPECT_EQ(*(*store)->schema_version(), kSchemaVersion);
  auto id = (*store)->begin_run(sample_run());
  ASSERT_TRUE(id.has_value());
  for (int i = 0; i < 3; ++i) {
    PointRecord p{i, 10.0 * i, 0.05 * i, -100.0 - i, 25.0, 0.2, 4.0};
    ASSERT_TRUE((*store)->append_point(*id, p).has_value());
  }
  EvaluationRecord e;
  e.method = "derivative";
  e.options_json = "{\"window_points\":5}";
  e.endpoints.push_back(EndpointRecord{0.075, 0.004, -101.5, 300.0, ""});
  auto eval = (*store)->add_evaluation(*id, e);
  ASSERT_TRUE(eval.has_value());
  ResultRecord r;
  r.run_id = *id;
  r.evaluation_id = *eval;
  r.name = "metal_concentration";
  r.value = 1.5;
  r.unit = "mmol/L";
  ASSERT_TRUE((*store)->add_result(r).has_value());
  ASSERT_TRUE((*store)->finish_run(*id, RunStatus::completed, "done").has_value());

  auto run = (*store)->load_run(*id);
  ASSERT_TRUE(run.has_value());
  EXPECT_EQ(run->run.sample_id, "well-7");
  EXPECT_EQ(run->status, RunStatus::completed);
  EXPECT_EQ(run->point_count, 3);
  auto points = (*store)->load_points(*id);
  ASSERT_EQ(points->size(), 3u);
  EXPECT_DOUBLE_EQ((*points)[2].volume_ml, 0.1);
  EXPECT_DOUBLE_EQ((*points)[2].signal, -102.0);
  auto evaluations = (*store)->load_evaluations(*id);
  ASSERT_EQ(evaluations->size(), 1u);
  ASSERT_EQ((*evaluations)[0].endpoints.size(), 1u);
  EXPECT_DOUBLE_EQ((*evaluations)[0].endpoints[0].volume_ml, 0.075);
  auto results = (*store)->load_results(*id);
  ASSERT_EQ(results->size(), 1u);
  EXPECT_EQ((*results)[0].unit, "mmol/L");
}

TEST(SqliteStore, RawPointsCannotBeChangedOrDeleted) {
  TempDir dir;
  const auto path = dir.file("b.sqlite");
  {
    auto store = SqliteStore::open(path);
    auto id = (*store)->begin_run(sample_run());
    ASSERT_TRUE((*store)->append_point(*id, PointRecord{0, 0, 0, -50, 25, 0, 3}).has_value());
    // The same index twice is refused: a point is written once.
    EXPECT_FALSE((*store)->append_point(*id, PointRecord{0, 1, 0, -51, 25, 0, 3}).has_value());
  }
  std::string error;
  EXPECT_NE(exec_raw(path, "UPDATE points SET signal = 0", &error), SQLITE_OK);
  EXPECT_NE(error.find("raw points cannot be changed"), std::string::npos) << error;
  EXPECT_NE(exec_raw(path, "DELETE FROM points", &error), SQLITE_OK);
  EXPECT_NE(error.find("raw points cannot be deleted"), std::string::npos) << error;
  auto store = SqliteStore::open(path);
  auto points = (*store)->load_points(1);
  ASSERT_EQ(points->size(), 1u);
  EXPECT_DOUBLE_EQ((*points)[0].signal, -50.0);
}

TEST(SqliteStore, PointsOfAnUnknownRunAreRefused) {
  TempDir dir;
  auto store = SqliteStore::open(dir.file("c.sqlite"));
  EXPECT_FALSE((*store)->append_point(42, PointRecord{}).has_value());  // foreign keys on
}

TEST(SqliteStore, RunningRunsOfADeadProcessAreMarkedInterruptedOnNextOpen) {
  TempDir dir;
  const auto path = dir.file("d.sqlite");
  (void)SqliteStore::open(path);  // the schema, before the child writes
  // A child process starts a run, stores a point and dies without finishing
  // it, as a killed veq would.
  const pid_t child = fork();
  ASSERT_GE(child, 0);
  if (child == 0) {
    auto store = SqliteStore::open(path);
    auto id = store ? (*store)->begin_run(sample_run()) : Result<std::int64_t>(store.error());
    const bool stored =
        id && (*store)->append_point(*id, PointRecord{0, 0, 0, -50, 25, 0, 3}).has_value();
    _exit(stored ? 0 : 1);  // no destructors, no finish_run
  }
  int status = 0;
  ASSERT_EQ(waitpid(child, &status, 0), child);
  ASSERT_TRUE(WIFEXITED(status) && WEXITSTATUS(status) == 0);
  auto store = SqliteStore::open(path);
  EXPECT_EQ((*store)->interrupted_on_open(), 1);
  auto run = (*store)->load_run(1);
  EXPECT_EQ(run->status, RunStatus::interrupted);
  EXPECT_EQ(run->point_count, 1);
  // The mark brings a stop owed to the run's burette, kept on disk until a
  // stop is confirmed: a start that dies before it sends the stop, or one
  // that cannot reach the burette, leaves it for the next.
  auto owed = (*store)->stops_owed();
  ASSERT_TRUE(owed.has_value());
  ASSERT_EQ(owed->size(), 1u);
  EXPECT_EQ((*owed)[0].run_id, 1);
  EXPECT_EQ((*owed)[0].burette, sample_run().burette);
  store->reset();
  auto again = SqliteStore::open(path);
  EXPECT_EQ((*again)->interrupted_on_open(), 0);  // marked once only
  ASSERT_EQ((*again)->stops_owed()->size(), 1u);  // still owed
  EXPECT_TRUE((*again)->stop_delivered(1).has_value());
  EXPECT_TRUE((*again)->stops_owed()->empty());
  auto twice = (*again)->stop_delivered(1);
  ASSERT_FALSE(twice.has_value());
  EXPECT_EQ(twice.error().kind, ErrorKind::not_found);
  again->reset();
  EXPECT_TRUE((*SqliteStore::open(path))->stops_owed()->empty());
}

TEST(SqliteStore, RunsOfALiveProcessStayRunningWhenTheFileIsOpenedAgain) {
  // Another instrument's veq (or this process through a second connection)
  // is titrating: opening the file must not cut its run off.
  TempDir dir;
  const auto path = dir.file("e.sqlite");
  auto first = SqliteStore::open(path);
  auto id = (*first)->begin_run(sample_run());
  ASSERT_TRUE(id.has_value());
  auto second = SqliteStore::open(path);
  EXPECT_EQ((*second)->interrupted_on_open(), 0);
  EXPECT_EQ((*second)->load_run(*id)->status, RunStatus::running);
  EXPECT_TRUE((*first)->append_point(*id, PointRecord{0, 0, 0, -50, 25, 0, 3}).has_value());
  EXPECT_TRUE((*first)->finish_run(*id, RunStatus::completed, "done").has_value());
}

TEST(SqliteStore, OwnerTokensNameOneLiveProcess) {
  const std::string me = process_owner_token();
  EXPECT_TRUE(owner_is_alive(me)) << me;
  // The same process id with another start time is a later process; another
  // boot, an empty token (a file from before schema 6) or garbage: not alive.
  const auto last = me.rfind('/');
  EXPECT_FALSE(owner_is_alive(me.substr(0, last + 1) + "1"));
  EXPECT_FALSE(owner_is_alive("00000000-0000-0000-0000-000000000000" + me.substr(me.find('/'))));
  EXPECT_FALSE(owner_is_alive(""));
  EXPECT_FALSE(owner_is_alive("no slashes"));
  EXPECT_FALSE(owner_is_alive(me.substr(0, me.find('/')) + "/x/1"));
}

std::uintmax_t size_and_bytes(const std::string& path, std::string* bytes) {
  std::ifstream in(path, std::ios::binary);
  bytes->assign(std::istreambuf_iterator<char>(in), {});
  return fs::file_size(path);
}

TEST(SqliteStore, RefusesAForeignSqliteFileAndLeavesItAlone) {
  TempDir dir;
  const auto path = dir.file("other.sqlite");
  ASSERT_EQ(exec_raw(path, "CREATE TABLE recipes (name TEXT); INSERT INTO recipes VALUES ('x')"),
            SQLITE_OK);
  std::string before, after;
  size_and_bytes(path, &before);
  auto store = SqliteStore::open(path);
  ASSERT_FALSE(store.has_value());
  EXPECT_NE(store.error().message.find("not a veq store"), std::string::npos);
  size_and_bytes(path, &after);
  EXPECT_EQ(before, after);
}

TEST(SqliteStore, RefusesANewerSchemaAndLeavesItAlone) {
  TempDir dir;
  const auto path = dir.file("newer.sqlite");
  { ASSERT_TRUE(SqliteStore::open(path).has_value()); }
  ASSERT_EQ(exec_raw(path, "PRAGMA user_version = 99"), SQLITE_OK);
  std::string before, after;
  size_and_bytes(path, &before);
  auto store = SqliteStore::open(path);
  ASSERT_FALSE(store.has_value());
  EXPECT_NE(store.error().message.find("schema version 99"), std::string::npos);
  size_and_bytes(path, &after);
  EXPECT_EQ(before, after);
}

TEST(SqliteStore, RefusesADamagedFileAndLeavesItAlone) {
  // A veq store whose points table has one page overwritten, as a bad disk
  // or a careless edit would leave it: refused before anything is written,
  // with SQLite's own words for the damage.
  TempDir dir;
  const auto path = dir.file("damaged.sqlite");
  {
    auto store = SqliteStore::open(path);
    ASSERT_TRUE(store.has_value());
    auto id = (*store)->begin_run(sample_run());
    ASSERT_TRUE(id.has_value());
    for (int i = 0; i < 500; ++i) {
      PointRecord p{i, 10.0 * i, 0.02 * i, -100.0 - 0.1 * i, 25.0, 0.2, 4.0};
      ASSERT_TRUE((*store)->append_point(*id, p).has_value());
    }
  }  // closing the last connection folds the WAL into the file
  std::int64_t root = 0, page_size = 0;
  {
    sqlite3* db = nullptr;
    sqlite3_open(path.c_str(), &db);
    sqlite3_stmt* s = nullptr;
    sqlite3_prepare_v2(db, "SELECT rootpage FROM sqlite_schema WHERE name = 'points'", -1, &s,
                       nullptr);
    ASSERT_EQ(sqlite3_step(s), SQLITE_ROW);
    root = sqlite3_column_int64(s, 0);
    sqlite3_finalize(s);
    sqlite3_prepare_v2(db, "PRAGMA page_size", -1, &s, nullptr);
    ASSERT_EQ(sqlite3_step(s), SQLITE_ROW);
    page_size = sqlite3_column_int64(s, 0);
    sqlite3_finalize(s);
    sqlite3_close(db);
  }
  ASSERT_GT(root, 1);
  {
    std::fstream f(path, std::ios::in | std::ios::out | std::ios::binary);
    f.seekp((root - 1) * page_size);
    const std::string garbage(static_cast<std::size_t>(page_size), '\xff');
    f.write(garbage.data(), static_cast<std::streamsize>(garbage.size()));
  }
  std::string before, after;
  size_and_bytes(path, &before);
  auto store = SqliteStore::open(path);
  ASSERT_FALSE(store.has_value());
  EXPECT_NE(store.error().message.find("is damaged"), std::string::npos) << store.error().message;
  EXPECT_NE(store.error().message.find("left unchanged"), std::string::npos);
  size_and_bytes(path, &after);
  EXPECT_EQ(before, after);
}

TEST(SqliteStore, RefusesAFileThatIsNotSqlite) {
  TempDir dir;
  const auto path = dir.file("text.sqlite");
  { std::ofstream(path) << "volume_ml,signal\n0.0,-50\n"; }
  auto store = SqliteStore::open(path);
  ASSERT_FALSE(store.has_value());
  std::ifstream in(path);
  std::string first;
  std::getline(in, first);
  EXPECT_EQ(first, "volume_ml,signal");
}

TEST(SqliteStore, DurabilitySettings) {
  // WAL with synchronous=FULL: see docs/store.md for why.
  TempDir dir;
  const auto path = dir.file("e.sqlite");
  auto store = SqliteStore::open(path);
  ASSERT_TRUE(store.has_value());
  sqlite3* db = nullptr;
  sqlite3_open(path.c_str(), &db);
  sqlite3_stmt* s = nullptr;
  sqlite3_prepare_v2(db, "PRAGMA journal_mode", -1, &s, nullptr);
  ASSERT_EQ(sqlite3_step(s), SQLITE_ROW);
  EXPECT_STREQ(reinterpret_cast<const char*>(sqlite3_column_text(s, 0)), "wal");
  sqlite3_finalize(s);
  sqlite3_close(db);
}

}  // namespace
}  // namespace veq::store
