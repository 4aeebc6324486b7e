#include "controller/store/sqlite_store.hpp"

#include <sqlite3.h>

#include <chrono>
#include <cstdlib>
#include <ctime>
#include <filesystem>
#include <fstream>
#include <sstream>
#include <utility>
#include <vector>

#include <unistd.h>

#include "common/version.hpp"
#include "controller/store/sqlite_statement.hpp"

namespace veq::store {

namespace {

// 'veq!' in ASCII: marks a file as a veq store (PRAGMA application_id).
constexpr int kApplicationId = 0x76657121;

// Migration k (1-based) brings a file from schema k-1 to schema k. Never edit
// a released migration: append a new one. A migration that rebuilds the points
// table must recreate the triggers that keep raw points unchangeable.
constexpr const char* kMigrations[] = {
    // 1: runs, raw points (append-only), evaluations, endpoints, results.
    R"sql(
CREATE TABLE runs (
  id INTEGER PRIMARY KEY,
  sample_id TEXT NOT NULL,
  series TEXT NOT NULL DEFAULT '',
  method_name TEXT NOT NULL,
  method_json TEXT NOT NULL,
  signal_kind INTEGER NOT NULL,
  sample_volume_ml REAL NOT NULL,
  titrant_name TEXT NOT NULL DEFAULT '',
  titrant_conc_mol_per_l REAL NOT NULL,
  burette TEXT NOT NULL DEFAULT '',
  sensor TEXT NOT NULL DEFAULT '',
  software_version TEXT NOT NULL,
  started_utc TEXT NOT NULL,
  finished_utc TEXT NOT NULL DEFAULT '',
  status INTEGER NOT NULL,
  end_reason TEXT NOT NULL DEFAULT ''
);
CREATE TABLE points (
  run_id INTEGER NOT NULL REFERENCES runs(id),
  idx INTEGER NOT NULL,
  time_s REAL NOT NULL,
  volume_ml REAL NOT NULL,
  signal REAL NOT NULL,
  temperature_c REAL NOT NULL,
  drift_per_min REAL NOT NULL,
  settle_s REAL NOT NULL,
  PRIMARY KEY (run_id, idx)
) WITHOUT ROWID;
CREATE TRIGGER points_are_unchangeable BEFORE UPDATE ON points
BEGIN SELECT RAISE(ABORT, 'raw points cannot be changed'); END;
CREATE TRIGGER points_are_undeletable BEFORE DELETE ON points
BEGIN SELECT RAISE(ABORT, 'raw points cannot be deleted'); END;
CREATE TABLE evaluations (
  id INTEGER PRIMARY KEY,
  run_id INTEGER NOT NULL REFERENCES runs(id),
  method TEXT NOT NULL,
  options_json TEXT NOT NULL,
  flags TEXT NOT NULL DEFAULT '',
  software_version TEXT NOT NULL,
  created_utc TEXT NOT NULL
);
CREATE TABLE endpoints (
  evaluation_id INTEGER NOT NULL REFERENCES evaluations(id),
  idx INTEGER NOT NULL,
  volume_ml REAL NOT NULL,
  uncertainty_ml REAL NOT NULL,
  signal REAL NOT NULL,
  steepness REAL NOT NULL,
  flags TEXT NOT NULL DEFAULT '',
  PRIMARY KEY (evaluation_id, idx)
) WITHOUT ROWID;
CREATE TABLE results (
  id INTEGER PRIMARY KEY,
  run_id INTEGER NOT NULL REFERENCES runs(id),
  evaluation_id INTEGER REFERENCES evaluations(id),
  name TEXT NOT NULL,
  value REAL NOT NULL,
  unit TEXT NOT NULL,
  created_utc TEXT NOT NULL
);
CREATE INDEX evaluations_by_run ON evaluations(run_id);
CREATE INDEX results_by_run ON results(run_id);
)sql",
    // 2: every state transition of a run, with its time and reason.
    R"sql(
CREATE TABLE run_events (
  run_id INTEGER NOT NULL REFERENCES runs(id),
  idx INTEGER NOT NULL,
  time_s REAL NOT NULL,
  from_state INTEGER NOT NULL,
  to_state INTEGER NOT NULL,
  reason TEXT NOT NULL,
  recorded_utc TEXT NOT NULL,
  PRIMARY KEY (run_id, idx)
) WITHOUT ROWID;
CREATE TRIGGER run_events_are_unchangeable BEFORE UPDATE ON run_events
BEGIN SELECT RAISE(ABORT, 'run events cannot be changed'); END;
CREATE TRIGGER run_events_are_undeletable BEFORE DELETE ON run_events
BEGIN SELECT RAISE(ABORT, 'run events cannot be deleted'); END;
)sql",
    // 3: methods with their versions (a version used by a run is frozen),
    // titrants with their titer history, electrode calibrations. History
    // tables are append-only like the raw points.
    R"sql(
CREATE TABLE methods (
  id INTEGER PRIMARY KEY,
  name TEXT NOT NULL UNIQUE,
  created_utc TEXT NOT NULL
);
CREATE TABLE method_versions (
  method_id INTEGER NOT NULL REFERENCES methods(id),
  version INTEGER NOT NULL CHECK (version >= 1),
  text TEXT NOT NULL,
  created_utc TEXT NOT NULL,
  PRIMARY KEY (method_id, version)
) WITHOUT ROWID;
CREATE TABLE method_uses (
  run_id INTEGER PRIMARY KEY REFERENCES runs(id),
  method_id INTEGER NOT NULL,
  version INTEGER NOT NULL,
  recorded_utc TEXT NOT NULL,
  FOREIGN KEY (method_id, version) REFERENCES method_versions(method_id, version)
);
CREATE INDEX method_uses_by_version ON method_uses(method_id, version);
CREATE TRIGGER used_method_versions_are_unchangeable BEFORE UPDATE ON method_versions
WHEN EXISTS (SELECT 1 FROM method_uses WHERE method_id = OLD.method_id AND version = OLD.version)
BEGIN SELECT RAISE(ABORT, 'a method version used by a run cannot be changed'); END;
CREATE TRIGGER used_method_versions_are_undeletable BEFORE DELETE ON method_versions
WHEN EXISTS (SELECT 1 FROM method_uses WHERE method_id = OLD.method_id AND version = OLD.version)
BEGIN SELECT RAISE(ABORT, 'a method version used by a run cannot be deleted'); END;
CREATE TRIGGER method_uses_are_unchangeable BEFORE UPDATE ON method_uses
BEGIN SELECT RAISE(ABORT, 'method uses cannot be changed'); END;
CREATE TRIGGER method_uses_are_undeletable BEFORE DELETE ON method_uses
BEGIN SELECT RAISE(ABORT, 'method uses cannot be deleted'); END;
CREATE TABLE titrants (
  id INTEGER PRIMARY KEY,
  name TEXT NOT NULL UNIQUE,
  nominal_conc_mol_per_l REAL NOT NULL CHECK (nominal_conc_mol_per_l > 0),
  lot TEXT NOT NULL DEFAULT '',
  prepared_utc TEXT NOT NULL DEFAULT '',
  updated_utc TEXT NOT NULL
);
CREATE TABLE titers (
  id INTEGER PRIMARY KEY,
  titrant_id INTEGER NOT NULL REFERENCES titrants(id),
  lot TEXT NOT NULL DEFAULT '',
  conc_mol_per_l REAL NOT NULL,
  rsd_percent REAL NOT NULL,
  accepted INTEGER NOT NULL CHECK (accepted IN (0, 1)),
  determined_utc TEXT NOT NULL,
  expires_utc TEXT NOT NULL,
  note TEXT NOT NULL DEFAULT '',
  recorded_utc TEXT NOT NULL
);
CREATE INDEX titers_by_titrant ON titers(titrant_id);
CREATE TABLE titer_determinations (
  titer_id INTEGER NOT NULL REFERENCES titers(id),
  idx INTEGER NOT NULL,
  conc_mol_per_l REAL NOT NULL,
  PRIMARY KEY (titer_id, idx)
) WITHOUT ROWID;
CREATE TRIGGER titers_are_unchangeable BEFORE UPDATE ON titers
BEGIN SELECT RAISE(ABORT, 'titers cannot be changed'); END;
CREATE TRIGGER titers_are_undeletable BEFORE DELETE ON titers
BEGIN SELECT RAISE(ABORT, 'titers cannot be deleted'); END;
CREATE TRIGGER titer_determinations_are_unchangeable BEFORE UPDATE ON titer_determinations
BEGIN SELECT RAISE(ABORT, 'titer determinations cannot be changed'); END;
CREATE TRIGGER titer_determinations_are_undeletable BEFORE DELETE ON titer_determinations
BEGIN SELECT RAISE(ABORT, 'titer determinations cannot be deleted'); END;
CREATE TABLE calibrations (
  id INTEGER PRIMARY KEY,
  electrode TEXT NOT NULL,
  slope_mv_per_decade REAL NOT NULL,
  e0_mv REAL NOT NULL,
  temperature_c REAL NOT NULL,
  accepted INTEGER NOT NULL CHECK (accepted IN (0, 1)),
  measured_utc TEXT NOT NULL,
  expires_utc TEXT NOT NULL,
  recorded_utc TEXT NOT NULL
);
CREATE INDEX calibrations_by_electrode ON calibrations(electrode);
CREATE TRIGGER calibrations_are_unchangeable BEFORE UPDATE ON calibrations
BEGIN SELECT RAISE(ABORT, 'calibrations cannot be changed'); END;
CREATE TRIGGER calibrations_are_undeletable BEFORE DELETE ON calibrations
BEGIN SELECT RAISE(ABORT, 'calibrations cannot be deleted'); END;
)sql",
    // 4: users, the tamper-evident audit trail with its keyed head, reviewers'
    // sign-offs and the evaluation each run's results use (see
    // controller/store/audit_trail.hpp). All of it append-only but the head.
    R"sql(
CREATE TABLE users (
  name TEXT PRIMARY KEY,
  role TEXT NOT NULL CHECK (role IN ('analyst', 'reviewer', 'administrator')),
  password_hash TEXT NOT NULL,
  created_utc TEXT NOT NULL,
  active INTEGER NOT NULL DEFAULT 1 CHECK (active IN (0, 1))
);
CREATE TABLE audit_records (
  sequence INTEGER PRIMARY KEY,
  at_utc TEXT NOT NULL,
  user_name TEXT NOT NULL,
  action TEXT NOT NULL,
  subject TEXT NOT NULL,
  old_value TEXT NOT NULL,
  new_value TEXT NOT NULL,
  reason TEXT NOT NULL,
  previous_hash TEXT NOT NULL,
  hash TEXT NOT NULL
);
CREATE TRIGGER audit_records_are_unchangeable BEFORE UPDATE ON audit_records
BEGIN SELECT RAISE(ABORT, 'audit records cannot be changed'); END;
CREATE TRIGGER audit_records_are_undeletable BEFORE DELETE ON audit_records
BEGIN SELECT RAISE(ABORT, 'audit records cannot be deleted'); END;
CREATE TABLE audit_head (
  id INTEGER PRIMARY KEY CHECK (id = 1),
  sequence INTEGER NOT NULL,
  tag TEXT NOT NULL
);
CREATE TABLE sign_offs (
  id INTEGER PRIMARY KEY,
  run_id INTEGER NOT NULL REFERENCES runs(id),
  reviewer TEXT NOT NULL REFERENCES users(name),
  meaning TEXT NOT NULL,
  signed_utc TEXT NOT NULL,
  audit_sequence INTEGER NOT NULL REFERENCES audit_records(sequence)
);
CREATE TRIGGER sign_offs_are_unchangeable BEFORE UPDATE ON sign_offs
BEGIN SELECT RAISE(ABORT, 'sign-offs cannot be changed'); END;
CREATE TRIGGER sign_offs_are_undeletable BEFORE DELETE ON sign_offs
BEGIN SELECT RAISE(ABORT, 'sign-offs cannot be deleted'); END;
CREATE TABLE evaluation_choices (
  id INTEGER PRIMARY KEY,
  run_id INTEGER NOT NULL REFERENCES runs(id),
  evaluation_id INTEGER NOT NULL REFERENCES evaluations(id),
  user_name TEXT NOT NULL,
  reason TEXT NOT NULL CHECK (reason <> ''),
  chosen_utc TEXT NOT NULL
);
CREATE INDEX evaluation_choices_by_run ON evaluation_choices(run_id);
CREATE TRIGGER evaluation_choices_are_unchangeable BEFORE UPDATE ON evaluation_choices
BEGIN SELECT RAISE(ABORT, 'evaluation choices cannot be changed'); END;
CREATE TRIGGER evaluation_choices_are_undeletable BEFORE DELETE ON evaluation_choices
BEGIN SELECT RAISE(ABORT, 'evaluation choices cannot be deleted'); END;
)sql",
    // 5: series of entries run unattended, each entry's determinations and
    // results, gravimetric burette checks (controller/store/series_store.hpp).
    // Determinations, results and checks are append-only; an entry's status
    // changes once, from running to how it ended.
    R"sql(
CREATE TABLE series (
  id INTEGER PRIMARY KEY,
  name TEXT NOT NULL,
  text TEXT NOT NULL,
  software_version TEXT NOT NULL,
  started_utc TEXT NOT NULL,
  finished_utc TEXT NOT NULL DEFAULT '',
  status INTEGER NOT NULL,
  reason TEXT NOT NULL DEFAULT ''
);
CREATE TABLE series_entries (
  id INTEGER PRIMARY KEY,
  series_id INTEGER NOT NULL REFERENCES series(id),
  idx INTEGER NOT NULL,
  kind TEXT NOT NULL,
  label TEXT NOT NULL,
  method_name TEXT NOT NULL DEFAULT '',
  method_version INTEGER NOT NULL DEFAULT 0,
  status TEXT NOT NULL,
  note TEXT NOT NULL DEFAULT '',
  started_utc TEXT NOT NULL,
  finished_utc TEXT NOT NULL DEFAULT ''
);
CREATE INDEX series_entries_by_series ON series_entries(series_id);
CREATE TRIGGER ended_series_entries_are_unchangeable BEFORE UPDATE ON series_entries
WHEN OLD.status <> 'running'
BEGIN SELECT RAISE(ABORT, 'an ended series entry cannot be changed'); END;
CREATE TABLE determinations (
  id INTEGER PRIMARY KEY,
  entry_id INTEGER NOT NULL REFERENCES series_entries(id),
  replicate INTEGER NOT NULL,
  position INTEGER NOT NULL,
  run_id INTEGER REFERENCES runs(id),
  second_run_id INTEGER REFERENCES runs(id),
  value REAL NOT NULL,
  unit TEXT NOT NULL,
  counted INTEGER NOT NULL CHECK (counted IN (0, 1)),
  flags TEXT NOT NULL DEFAULT '',
  detail_json TEXT NOT NULL DEFAULT '{}',
  recorded_utc TEXT NOT NULL
);
CREATE INDEX determinations_by_entry ON determinations(entry_id);
CREATE TRIGGER determinations_are_unchangeable BEFORE UPDATE ON determinations
BEGIN SELECT RAISE(ABORT, 'determinations cannot be changed'); END;
CREATE TRIGGER determinations_are_undeletable BEFORE DELETE ON determinations
BEGIN SELECT RAISE(ABORT, 'determinations cannot be deleted'); END;
CREATE TABLE entry_results (
  id INTEGER PRIMARY KEY,
  entry_id INTEGER NOT NULL REFERENCES series_entries(id),
  name TEXT NOT NULL,
  value REAL NOT NULL,
  unit TEXT NOT NULL,
  count INTEGER NOT NULL,
  sd REAL NOT NULL,
  rsd_percent REAL NOT NULL,
  flags TEXT NOT NULL DEFAULT '',
  detail_json TEXT NOT NULL DEFAULT '{}',
  recorded_utc TEXT NOT NULL
);
CREATE INDEX entry_results_by_entry ON entry_results(entry_id);
CREATE TRIGGER entry_results_are_unchangeable BEFORE UPDATE ON entry_results
BEGIN SELECT RAISE(ABORT, 'entry results cannot be changed'); END;
CREATE TRIGGER entry_results_are_undeletable BEFORE DELETE ON entry_results
BEGIN SELECT RAISE(ABORT, 'entry results cannot be deleted'); END;
CREATE TABLE burette_checks (
  id INTEGER PRIMARY KEY,
  entry_id INTEGER REFERENCES series_entries(id),
  burette TEXT NOT NULL,
  nominal_volume_ml REAL NOT NULL,
  test_volume_ml REAL NOT NULL,
  water_masses_json TEXT NOT NULL,
  water_temperature_c REAL NOT NULL,
  mean_volume_ml REAL NOT NULL,
  systematic_error_percent REAL NOT NULL,
  random_error_percent REAL NOT NULL,
  passed INTEGER NOT NULL CHECK (passed IN (0, 1)),
  limits_source TEXT NOT NULL,
  checked_utc TEXT NOT NULL
);
CREATE INDEX burette_checks_by_burette ON burette_checks(burette);
CREATE TRIGGER burette_checks_are_unchangeable BEFORE UPDATE ON burette_checks
BEGIN SELECT RAISE(ABORT, 'burette checks cannot be changed'); END;
CREATE TRIGGER burette_checks_are_undeletable BEFORE DELETE ON burette_checks
BEGIN SELECT RAISE(ABORT, 'burette checks cannot be deleted'); END;
)sql",
    // 6: the process that owns a running run or series, so that opening the
    // file marks interrupted only what a dead process left running.
    R"sql(
ALTER TABLE runs ADD COLUMN owner TEXT NOT NULL DEFAULT '';
ALTER TABLE series ADD COLUMN owner TEXT NOT NULL DEFAULT '';
)sql",
    // 7: a run marked interrupted owes its burette a stop until one is
    // confirmed (runs marked by older versions were stopped by them).
    R"sql(
ALTER TABLE runs ADD COLUMN stop_owed INTEGER NOT NULL DEFAULT 0 CHECK (stop_owed IN (0, 1));
)sql",
};
constexpr int kMigrationCount = static_cast<int>(sizeof kMigrations / sizeof kMigrations[0]);
static_assert(kMigrationCount == kSchemaVersion, "one migration per schema version");

using detail::Statement;

const char* kRunColumns =
    "id, sample_id, series, method_name, method_json, signal_kind, sample_volume_ml, "
    "titrant_name, titrant_conc_mol_per_l, burette, sensor, software_version, started_utc, "
    "finished_utc, status, end_reason, (SELECT COUNT(*) FROM points WHERE run_id = runs.id)";

RunRecord read_run(const Statement& s) {
  RunRecord r;
  r.id = s.integer(0);
  r.run.sample_id = s.text(1);
  r.run.series = s.text(2);
  r.run.method_name = s.text(3);
  r.run.method_json = s.text(4);
  r.run.signal_kind = static_cast<int>(s.integer(5));
  r.run.sample_volume_ml = s.real(6);
  r.run.titrant_name = s.text(7);
  r.run.titrant_conc_mol_per_l = s.real(8);
  r.run.burette = s.text(9);
  r.run.sensor = s.text(10);
  r.software_version = s.text(11);
  r.started_utc = s.text(12);
  r.finished_utc = s.text(13);
  r.status = static_cast<RunStatus>(s.integer(14));
  r.end_reason = s.text(15);
  r.point_count = s.integer(16);
  return r;
}

}  // namespace

const char* schema_migration_sql(int target) {
  if (target < 1 || target > kMigrationCount)
    return nullptr;
  return kMigrations[target - 1];
}

const char* run_status_name(RunStatus status) {
  switch (status) {
    case RunStatus::running:
      return "running";
    case RunStatus::completed:
      return "completed";
    case RunStatus::failed:
      return "failed";
    case RunStatus::aborted:
      return "aborted";
    case RunStatus::interrupted:
      return "interrupted";
    case RunStatus::imported:
      return "imported";
  }
  return "unknown";
}

namespace {

std::string read_first_line(const std::string& path) {
  std::ifstream in(path);
  std::string line;
  std::getline(in, line);
  return line;
}

/// A process's start time in clock ticks after boot (field 22 of
/// /proc/PID/stat), or "" if there is no such live process (a zombie, a
/// process killed but not yet reaped, counts as dead).
std::string process_start_ticks(long pid) {
  const std::string stat = read_first_line("/proc/" + std::to_string(pid) + "/stat");
  // The command name (field 2) is in parentheses and may hold spaces.
  const auto close = stat.rfind(')');
  if (close == std::string::npos)
    return "";
  std::istringstream fields(stat.substr(close + 1));
  std::string state;
  fields >> state;  // field 3
  if (state.empty() || state == "Z" || state == "X")
    return "";
  std::string field;
  for (int i = 4; i <= 22 && fields >> field; ++i) {
  }
  return field;
}

}  // namespace

std::string process_owner_token() {
  // Not cached: a forked child is another process with another id.
  const long pid = ::getpid();
  return read_first_line("/proc/sys/kernel/random/boot_id") + "/" + std::to_string(pid) + "/" +
         process_start_ticks(pid);
}

bool owner_is_alive(const std::string& token) {
  // "" is a run from before schema 6 (or from an older veq): nobody owns it.
  const auto first = token.find('/');
  const auto second = token.find('/', first == std::string::npos ? first : first + 1);
  if (first == std::string::npos || second == std::string::npos)
    return false;
  // Another boot (a power cut, a restart) or another machine: not running here.
  if (token.substr(0, first) != read_first_line("/proc/sys/kernel/random/boot_id"))
    return false;
  const std::string pid_text = token.substr(first + 1, second - first - 1);
  char* end = nullptr;
  const long pid = std::strtol(pid_text.c_str(), &end, 10);
  if (pid_text.empty() || *end != '\0' || pid <= 0)
    return false;
  // The same process id with another start time is a later process.
  const std::string started = process_start_ticks(pid);
  return !started.empty() && started == token.substr(second + 1);
}

std::string default_database_path() {
  if (const char* env = std::getenv("VEQ_DB"); env && *env)
    return env;
  return "veq.sqlite";
}

std::string utc_now_iso8601() {
  const auto now = std::chrono::system_clock::now();
  const std::time_t t = std::chrono::system_clock::to_time_t(now);
  const auto ms =
      std::chrono::duration_cast<std::chrono::milliseconds>(now.time_since_epoch()).count() % 1000;
  std::tm tm{};
  gmtime_r(&t, &tm);
  char buffer[40];
  std::strftime(buffer, sizeof buffer, "%Y-%m-%dT%H:%M:%S", &tm);
  char out[48];
  std::snprintf(out, sizeof out, "%s.%03dZ", buffer, static_cast<int>(ms));
  return out;
}

SqliteStore::SqliteStore(sqlite3* db, std::string path) : db_(db), path_(std::move(path)) {}

SqliteStore::~SqliteStore() {
  sqlite3_close_v2(db_);
}

Error SqliteStore::storage_error(const std::string& what) const {
  return make_error(ErrorKind::storage, what + " in '" + path_ + "': " + sqlite3_errmsg(db_));
}

Result<void> SqliteStore::exec(const char* sql) {
  char* message = nullptr;
  if (sqlite3_exec(db_, sql, nullptr, nullptr, &message) != SQLITE_OK) {
    std::string text = message ? message : "unknown error";
    sqlite3_free(message);
    return make_error(ErrorKind::storage, "database '" + path_ + "': " + text);
  }
  return {};
}

Result<std::vector<SqliteStore::OwedStop>> SqliteStore::stops_owed() {
  const auto serialized = serialize();
  Statement s(db_, "SELECT id, burette FROM runs WHERE stop_owed = 1 ORDER BY id");
  std::vector<OwedStop> owed;
  int rc = 0;
  while ((rc = s.step()) == SQLITE_ROW)
    owed.push_back({s.integer(0), s.text(1)});
  if (rc != SQLITE_DONE)
    return storage_error("cannot read the stops owed after interrupted runs");
  return owed;
}

Result<void> SqliteStore::stop_delivered(std::int64_t run_id) {
  const auto serialized = serialize();
  Statement s(db_, "UPDATE runs SET stop_owed = 0 WHERE id = ?1 AND stop_owed = 1");
  s.bind(1, run_id);
  if (s.step() != SQLITE_DONE)
    return storage_error("cannot record the stop delivered after run " + std::to_string(run_id));
  if (sqlite3_changes(db_) != 1)
    return make_error(ErrorKind::not_found,
                      "run " + std::to_string(run_id) + " owes no stop to its burette");
  return {};
}

Result<int> SqliteStore::schema_version() {
  const auto serialized = serialize();
  Statement s(db_, "PRAGMA user_version");
  if (!s.ok() || s.step() != SQLITE_ROW)
    return storage_error("cannot read the schema version");
  return static_cast<int>(s.integer(0));
}

Result<std::unique_ptr<SqliteStore>> SqliteStore::open(const std::string& path) {
  sqlite3* db = nullptr;
  const int rc =
      sqlite3_open_v2(path.c_str(), &db, SQLITE_OPEN_READWRITE | SQLITE_OPEN_CREATE, nullptr);
  if (rc != SQLITE_OK) {
    std::string message = db ? sqlite3_errmsg(db) : "out of memory";
    sqlite3_close_v2(db);
    return make_error(ErrorKind::storage, "cannot open database '" + path + "': " + message);
  }
  std::unique_ptr<SqliteStore> store(new SqliteStore(db, path));
  sqlite3_busy_timeout(db, 5000);
  sqlite3_extended_result_codes(db, 1);

  // Read what the file is before changing anything in it.
  int application_id = 0;
  int version = 0;
  std::int64_t tables = 0;
  {
    Statement a(db, "PRAGMA application_id");
    if (!a.ok() || a.step() != SQLITE_ROW) {
      return make_error(ErrorKind::storage,
                        "'" + path + "' is not a readable SQLite database: " + sqlite3_errmsg(db));
    }
    application_id = static_cast<int>(a.integer(0));
    Statement v(db, "PRAGMA user_version");
    v.step();
    version = static_cast<int>(v.integer(0));
    Statement t(db, "SELECT COUNT(*) FROM sqlite_schema");
    if (!t.ok() || t.step() != SQLITE_ROW) {
      return make_error(ErrorKind::storage,
                        "'" + path + "' is not a readable SQLite database: " + sqlite3_errmsg(db));
    }
    tables = t.integer(0);
  }
  if (tables > 0 && application_id != kApplicationId) {
    return make_error(
        ErrorKind::invalid_input,
        "'" + path + "' is an SQLite file but not a veq store; it was left unchanged");
  }
  if (version > kSchemaVersion) {
    return make_error(ErrorKind::invalid_input,
                      "'" + path + "' has schema version " + std::to_string(version) +
                          ", newer than this veq (" + std::to_string(kSchemaVersion) +
                          "); use a newer veq. The file was left unchanged");
  }

  // A damaged file (a bad disk, a copy cut short, an edit with the wrong
  // tool) is refused before anything is written to it: SQLite's quick check
  // reads every page once (about 0.3 s for 60 MB here) and names the first
  // problems it finds.
  if (tables > 0) {
    Statement q(db, "PRAGMA quick_check(3)");
    std::string problems;
    int step = q.ok() ? q.step() : SQLITE_ERROR;
    while (step == SQLITE_ROW) {
      const std::string line = q.text(0);
      if (line != "ok")
        problems += (problems.empty() ? "" : "; ") + line;
      step = q.step();
    }
    if (step != SQLITE_DONE && problems.empty())
      problems = sqlite3_errmsg(db);
    if (!problems.empty()) {
      return make_error(ErrorKind::storage,
                        "'" + path + "' is damaged (SQLite quick check: " + problems +
                            "); it was left unchanged. Restore it from a backup, or recover "
                            "what is readable with the sqlite3 tool's .recover command");
    }
  }

  // WAL: readers never block the writer and a crash leaves the file intact.
  // synchronous=FULL: each commit is fsynced, so an acknowledged point survives
  // a power cut, not only a killed process (about 0.4 ms per point here).
  // foreign_keys: points, evaluations and results always belong to a run.
  if (auto r = store->exec("PRAGMA journal_mode=WAL"); !r)
    return r.error();
  if (auto r = store->exec("PRAGMA synchronous=FULL"); !r)
    return r.error();
  if (auto r = store->exec("PRAGMA foreign_keys=ON"); !r)
    return r.error();

  for (int target = version + 1; target <= kSchemaVersion; ++target) {
    if (auto r = store->exec("BEGIN IMMEDIATE"); !r)
      return r.error();
    auto applied = store->exec(kMigrations[target - 1]);
    if (applied) {
      const std::string pragmas = "PRAGMA user_version=" + std::to_string(target) +
                                  "; PRAGMA application_id=" + std::to_string(kApplicationId);
      applied = store->exec(pragmas.c_str());
    }
    if (!applied) {
      (void)store->exec("ROLLBACK");
      return make_error(ErrorKind::storage, "migration to schema " + std::to_string(target) +
                                                " failed: " + applied.error().message);
    }
    if (auto r = store->exec("COMMIT"); !r)
      return r.error();
  }

  // A run still "running" here was cut off by a crash or power loss, unless
  // the process that owns it is still alive: another instrument's veq, or
  // this process through another connection, may be titrating right now.
  const auto dead_owned = [&](const char* table) -> Result<std::vector<std::int64_t>> {
    Statement s(db, (std::string("SELECT id, owner FROM ") + table + " WHERE status = ?1").c_str());
    s.bind(1, static_cast<int>(RunStatus::running));  // SeriesStatus::running has the same value
    std::vector<std::int64_t> ids;
    int rc = 0;
    while ((rc = s.step()) == SQLITE_ROW) {
      if (!owner_is_alive(s.text(1)))
        ids.push_back(s.integer(0));
    }
    if (rc != SQLITE_DONE)
      return store->storage_error(std::string("cannot read the running ") + table);
    return ids;
  };
  static_assert(static_cast<int>(RunStatus::running) == static_cast<int>(SeriesStatus::running));
  auto dead_runs = dead_owned("runs");
  if (!dead_runs)
    return dead_runs.error();
  for (const std::int64_t id : *dead_runs) {
    Statement s(db,
                "UPDATE runs SET status = ?1, end_reason = ?2, finished_utc = ?3, stop_owed = 1 "
                "WHERE id = ?4 AND status = ?5");
    s.bind(1, static_cast<int>(RunStatus::interrupted))
        .bind(2, std::string("interrupted: veq stopped before the run ended"))
        .bind(3, utc_now_iso8601())
        .bind(4, id)
        .bind(5, static_cast<int>(RunStatus::running));
    if (s.step() != SQLITE_DONE)
      return store->storage_error("cannot mark run " + std::to_string(id) + " interrupted");
    store->interrupted_on_open_ += sqlite3_changes(db);
  }
  // Likewise a series, and the entry it was running.
  auto dead_series = dead_owned("series");
  if (!dead_series)
    return dead_series.error();
  for (const std::int64_t id : *dead_series) {
    const std::string now = utc_now_iso8601();
    Statement e(db,
                "UPDATE series_entries SET status = 'interrupted', finished_utc = ?1, note = "
                "note || CASE WHEN note = '' THEN '' ELSE char(10) END || "
                "'interrupted: veq stopped before the entry ended' "
                "WHERE status = 'running' AND series_id = ?2");
    e.bind(1, now).bind(2, id);
    Statement s(db,
                "UPDATE series SET status = ?1, reason = ?2, finished_utc = ?3 "
                "WHERE id = ?4 AND status = ?5");
    s.bind(1, static_cast<int>(SeriesStatus::interrupted))
        .bind(2, std::string("interrupted: veq stopped before the series ended"))
        .bind(3, now)
        .bind(4, id)
        .bind(5, static_cast<int>(SeriesStatus::running));
    if (e.step() != SQLITE_DONE || s.step() != SQLITE_DONE)
      return store->storage_error("cannot mark series " + std::to_string(id) + " interrupted");
  }
  return store;
}

Result<std::int64_t> SqliteStore::begin_run(const NewRun& run) {
  const auto serialized = serialize();
  Statement s(db_,
              "INSERT INTO runs (sample_id, series, method_name, method_json, signal_kind, "
              "sample_volume_ml, titrant_name, titrant_conc_mol_per_l, burette, sensor, "
              "software_version, started_utc, status, owner) "
              "VALUES (?1, ?2, ?3, ?4, ?5, ?6, ?7, ?8, ?9, ?10, ?11, ?12, ?13, ?14)");
  s.bind(1, run.sample_id)
      .bind(2, run.series)
      .bind(3, run.method_name)
      .bind(4, run.method_json)
      .bind(5, run.signal_kind)
      .bind(6, run.sample_volume_ml)
      .bind(7, run.titrant_name)
      .bind(8, run.titrant_conc_mol_per_l)
      .bind(9, run.burette)
      .bind(10, run.sensor)
      .bind(11, std::string(kVersion))
      .bind(12, utc_now_iso8601())
      .bind(13, static_cast<int>(RunStatus::running))
      .bind(14, process_owner_token());
  if (s.step() != SQLITE_DONE)
    return storage_error("cannot start run for '" + run.sample_id + "'");
  return static_cast<std::int64_t>(sqlite3_last_insert_rowid(db_));
}

Result<void> SqliteStore::append_point(std::int64_t run_id, const PointRecord& p) {
  const auto serialized = serialize();
  // One statement in autocommit mode: committed (and fsynced) when step returns.
  Statement s(db_,
              "INSERT INTO points (run_id, idx, time_s, volume_ml, signal, temperature_c, "
              "drift_per_min, settle_s) VALUES (?1, ?2, ?3, ?4, ?5, ?6, ?7, ?8)");
  s.bind(1, run_id)
      .bind(2, p.index)
      .bind(3, p.time_s)
      .bind(4, p.volume_ml)
      .bind(5, p.signal)
      .bind(6, p.temperature_c)
      .bind(7, p.drift_per_min)
      .bind(8, p.settle_s);
  if (s.step() != SQLITE_DONE) {
    return storage_error("cannot store point " + std::to_string(p.index) + " of run " +
                         std::to_string(run_id));
  }
  return {};
}

Result<void> SqliteStore::finish_run(std::int64_t run_id, RunStatus status,
                                     const std::string& reason) {
  const auto serialized = serialize();
  Statement s(db_, "UPDATE runs SET status = ?1, end_reason = ?2, finished_utc = ?3 WHERE id = ?4");
  s.bind(1, static_cast<int>(status)).bind(2, reason).bind(3, utc_now_iso8601()).bind(4, run_id);
  if (s.step() != SQLITE_DONE)
    return storage_error("cannot end run " + std::to_string(run_id));
  if (sqlite3_changes(db_) != 1) {
    return make_error(ErrorKind::not_found, "no run " + std::to_string(run_id) + " in " + path_);
  }
  return {};
}

Result<std::int64_t> SqliteStore::add_evaluation(std::int64_t run_id, const EvaluationRecord& e) {
  const auto serialized = serialize();
  if (auto r = exec("BEGIN IMMEDIATE"); !r)
    return r.error();
  auto fail = [&](const std::string& what) -> Result<std::int64_t> {
    Error error = storage_error(what);
    (void)exec("ROLLBACK");
    return error;
  };
  Statement s(db_,
              "INSERT INTO evaluations (run_id, method, options_json, flags, software_version, "
              "created_utc) VALUES (?1, ?2, ?3, ?4, ?5, ?6)");
  s.bind(1, run_id)
      .bind(2, e.method)
      .bind(3, e.options_json)
      .bind(4, e.flags)
      .bind(5, std::string(kVersion))
      .bind(6, utc_now_iso8601());
  if (s.step() != SQLITE_DONE)
    return fail("cannot add an evaluation to run " + std::to_string(run_id));
  const std::int64_t id = sqlite3_last_insert_rowid(db_);
  for (std::size_t i = 0; i < e.endpoints.size(); ++i) {
    const auto& p = e.endpoints[i];
    Statement ep(db_,
                 "INSERT INTO endpoints (evaluation_id, idx, volume_ml, uncertainty_ml, signal, "
                 "steepness, flags) VALUES (?1, ?2, ?3, ?4, ?5, ?6, ?7)");
    ep.bind(1, id)
        .bind(2, static_cast<std::int64_t>(i))
        .bind(3, p.volume_ml)
        .bind(4, p.uncertainty_ml)
        .bind(5, p.signal)
        .bind(6, p.steepness)
        .bind(7, p.flags);
    if (ep.step() != SQLITE_DONE)
      return fail("cannot store endpoint " + std::to_string(i));
  }
  if (auto r = exec("COMMIT"); !r)
    return r.error();
  return id;
}

Result<std::int64_t> SqliteStore::add_result(const ResultRecord& r) {
  const auto serialized = serialize();
  Statement s(db_,
              "INSERT INTO results (run_id, evaluation_id, name, value, unit, created_utc) "
              "VALUES (?1, ?2, ?3, ?4, ?5, ?6)");
  s.bind(1, r.run_id).bind(3, r.name).bind(4, r.value).bind(5, r.unit).bind(6, utc_now_iso8601());
  if (r.evaluation_id > 0)
    s.bind(2, r.evaluation_id);
  if (s.step() != SQLITE_DONE)
    return storage_error("cannot store result '" + r.name + "'");
  return static_cast<std::int64_t>(sqlite3_last_insert_rowid(db_));
}

Result<std::int64_t> SqliteStore::import_run(const NewRun& run,
                                             const std::vector<PointRecord>& points,
                                             const std::string& origin) {
  const auto serialized = serialize();
  if (auto r = exec("BEGIN IMMEDIATE"); !r)
    return r.error();
  auto id = begin_run(run);
  if (!id) {
    (void)exec("ROLLBACK");
    return id.error();
  }
  for (const auto& p : points) {
    if (auto stored = append_point(*id, p); !stored) {
      (void)exec("ROLLBACK");
      return stored.error();
    }
  }
  {
    Statement s(db_,
                "UPDATE runs SET status = ?1, end_reason = ?2, finished_utc = ?3 WHERE id = ?4");
    s.bind(1, static_cast<int>(RunStatus::imported))
        .bind(2, "imported from " + origin)
        .bind(3, utc_now_iso8601())
        .bind(4, *id);
    if (s.step() != SQLITE_DONE) {
      Error error = storage_error("cannot mark run as imported");
      (void)exec("ROLLBACK");
      return error;
    }
  }
  if (auto r = exec("COMMIT"); !r) {
    (void)exec("ROLLBACK");
    return r.error();
  }
  return *id;
}

Result<void> SqliteStore::record_event(std::int64_t run_id, const RunEvent& e) {
  const auto serialized = serialize();
  Statement s(db_,
              "INSERT INTO run_events (run_id, idx, time_s, from_state, to_state, reason, "
              "recorded_utc) VALUES (?1, (SELECT IFNULL(MAX(idx), -1) + 1 FROM run_events "
              "WHERE run_id = ?1), ?2, ?3, ?4, ?5, ?6)");
  s.bind(1, run_id)
      .bind(2, e.time_s)
      .bind(3, e.from_state)
      .bind(4, e.to_state)
      .bind(5, e.reason)
      .bind(6, utc_now_iso8601());
  if (s.step() != SQLITE_DONE) {
    return storage_error("cannot record an event of run " + std::to_string(run_id));
  }
  return {};
}

Result<std::vector<RunEvent>> SqliteStore::load_events(std::int64_t run_id) {
  const auto serialized = serialize();
  Statement s(db_,
              "SELECT time_s, from_state, to_state, reason, recorded_utc FROM run_events "
              "WHERE run_id = ?1 ORDER BY idx");
  s.bind(1, run_id);
  std::vector<RunEvent> out;
  int rc;
  while ((rc = s.step()) == SQLITE_ROW) {
    out.push_back(RunEvent{s.real(0), static_cast<int>(s.integer(1)),
                           static_cast<int>(s.integer(2)), s.text(3), s.text(4)});
  }
  if (rc != SQLITE_DONE)
    return storage_error("cannot read events of run " + std::to_string(run_id));
  return out;
}

Result<RunRecord> SqliteStore::load_run(std::int64_t run_id) {
  const auto serialized = serialize();
  const std::string sql = std::string("SELECT ") + kRunColumns + " FROM runs WHERE id = ?1";
  Statement s(db_, sql.c_str());
  s.bind(1, run_id);
  const int rc = s.step();
  if (rc == SQLITE_DONE) {
    return make_error(ErrorKind::not_found, "no run " + std::to_string(run_id) + " in " + path_);
  }
  if (rc != SQLITE_ROW)
    return storage_error("cannot read run " + std::to_string(run_id));
  return read_run(s);
}

Result<std::vector<RunRecord>> SqliteStore::list_runs() {
  const auto serialized = serialize();
  const std::string sql = std::string("SELECT ") + kRunColumns + " FROM runs ORDER BY id";
  Statement s(db_, sql.c_str());
  std::vector<RunRecord> out;
  int rc;
  while ((rc = s.step()) == SQLITE_ROW)
    out.push_back(read_run(s));
  if (rc != SQLITE_DONE)
    return storage_error("cannot list runs");
  return out;
}

Result<std::vector<PointRecord>> SqliteStore::load_points(std::int64_t run_id) {
  const auto serialized = serialize();
  Statement s(db_,
              "SELECT idx, time_s, volume_ml, signal, temperature_c, drift_per_min, settle_s "
              "FROM points WHERE run_id = ?1 ORDER BY idx");
  s.bind(1, run_id);
  std::vector<PointRecord> out;
  int rc;
  while ((rc = s.step()) == SQLITE_ROW) {
    PointRecord p;
    p.index = s.integer(0);
    p.time_s = s.real(1);
    p.volume_ml = s.real(2);
    p.signal = s.real(3);
    p.temperature_c = s.real(4);
    p.drift_per_min = s.real(5);
    p.settle_s = s.real(6);
    out.push_back(p);
  }
  if (rc != SQLITE_DONE)
    return storage_error("cannot read points of run " + std::to_string(run_id));
  return out;
}

Result<std::vector<EvaluationRecord>> SqliteStore::load_evaluations(std::int64_t run_id) {
  const auto serialized = serialize();
  Statement s(db_,
              "SELECT id, method, options_json, flags, created_utc FROM evaluations "
              "WHERE run_id = ?1 ORDER BY id");
  s.bind(1, run_id);
  std::vector<EvaluationRecord> out;
  int rc;
  while ((rc = s.step()) == SQLITE_ROW) {
    EvaluationRecord e;
    e.id = s.integer(0);
    e.run_id = run_id;
    e.method = s.text(1);
    e.options_json = s.text(2);
    e.flags = s.text(3);
    e.created_utc = s.text(4);
    out.push_back(std::move(e));
  }
  if (rc != SQLITE_DONE)
    return storage_error("cannot read evaluations");
  for (auto& e : out) {
    Statement p(db_,
                "SELECT volume_ml, uncertainty_ml, signal, steepness, flags FROM endpoints "
                "WHERE evaluation_id = ?1 ORDER BY idx");
    p.bind(1, e.id);
    while ((rc = p.step()) == SQLITE_ROW) {
      e.endpoints.push_back(EndpointRecord{p.real(0), p.real(1), p.real(2), p.real(3), p.text(4)});
    }
    if (rc != SQLITE_DONE)
      return storage_error("cannot read endpoints");
  }
  return out;
}

Result<std::vector<ResultRecord>> SqliteStore::load_results(std::int64_t run_id) {
  const auto serialized = serialize();
  Statement s(db_,
              "SELECT id, IFNULL(evaluation_id, 0), name, value, unit FROM results "
              "WHERE run_id = ?1 ORDER BY id");
  s.bind(1, run_id);
  std::vector<ResultRecord> out;
  int rc;
  while ((rc = s.step()) == SQLITE_ROW) {
    ResultRecord r;
    r.id = s.integer(0);
    r.run_id = run_id;
    r.evaluation_id = s.integer(1);
    r.name = s.text(2);
    r.value = s.real(3);
    r.unit = s.text(4);
    out.push_back(std::move(r));
  }
  if (rc != SQLITE_DONE)
    return storage_error("cannot read results");
  return out;
}

}  // namespace veq::store
