// The run store in one SQLite file (schema and settings in docs/store.md).
#pragma once

#include <memory>
#include <mutex>
#include <string>
#include <vector>

#include "controller/store/method_store.hpp"
#include "controller/store/run_store.hpp"
#include "controller/store/series_store.hpp"

struct sqlite3;

namespace veq::store {

/// Schema version this build writes; older files are migrated on open.
inline constexpr int kSchemaVersion = 7;

/// Default database path when none is given: $VEQ_DB, else ./veq.sqlite.
std::string default_database_path();

/// One connection to the file. Safe to share between threads: every call
/// runs alone on the connection (a lock held for the call), so the
/// instruments of one process write through one writer and never contend with
/// each other for SQLite's write lock; a call returns once its transaction is
/// committed. Other processes use their own connections (busy timeout 5 s).
class SqliteStore final : public RunStore, public MethodStore, public SeriesStore {
 public:
  /// Opens (creating if absent) and migrates a store. Refuses a file that is
  /// not a veq store, or that was written by a newer schema, without touching it.
  static Result<std::unique_ptr<SqliteStore>> open(const std::string& path);
  ~SqliteStore() override;
  SqliteStore(const SqliteStore&) = delete;
  SqliteStore& operator=(const SqliteStore&) = delete;

  Result<std::int64_t> begin_run(const NewRun& run) override;
  Result<void> append_point(std::int64_t run_id, const PointRecord& point) override;
  Result<void> finish_run(std::int64_t run_id, RunStatus status,
                          const std::string& reason) override;
  Result<std::int64_t> add_evaluation(std::int64_t run_id,
                                      const EvaluationRecord& evaluation) override;
  Result<std::int64_t> add_result(const ResultRecord& result) override;
  Result<std::int64_t> import_run(const NewRun& run, const std::vector<PointRecord>& points,
                                  const std::string& origin) override;

  Result<RunRecord> load_run(std::int64_t run_id) override;
  Result<std::vector<RunRecord>> list_runs() override;
  Result<std::vector<PointRecord>> load_points(std::int64_t run_id) override;
  Result<std::vector<EvaluationRecord>> load_evaluations(std::int64_t run_id) override;
  Result<std::vector<ResultRecord>> load_results(std::int64_t run_id) override;
  Result<void> record_event(std::int64_t run_id, const RunEvent& event) override;
  Result<std::vector<RunEvent>> load_events(std::int64_t run_id) override;

  Result<MethodVersionRecord> save_method_version(const std::string& name,
                                                  const std::string& text) override;
  Result<void> replace_method_version(const std::string& name, int version,
                                      const std::string& text) override;
  Result<MethodVersionRecord> load_method_version(const std::string& name,
                                                  int version = 0) override;
  Result<std::vector<MethodVersionRecord>> list_method_versions(const std::string& name) override;
  Result<std::vector<std::string>> list_method_names() override;
  Result<void> record_method_use(std::int64_t run_id, const std::string& name,
                                 int version) override;
  Result<void> save_titrant(const TitrantRecord& titrant) override;
  Result<TitrantRecord> load_titrant(const std::string& name) override;
  Result<std::vector<TitrantRecord>> list_titrants() override;
  Result<std::int64_t> add_titer(const TiterRecord& titer) override;
  Result<std::vector<TiterRecord>> titer_history(const std::string& titrant) override;
  Result<std::int64_t> add_calibration(const CalibrationRecord& calibration) override;
  Result<std::vector<CalibrationRecord>> calibration_history(const std::string& electrode) override;

  Result<std::int64_t> begin_series(const std::string& name, const std::string& text) override;
  Result<void> finish_series(std::int64_t series_id, SeriesStatus status,
                             const std::string& reason) override;
  Result<std::int64_t> begin_entry(const SeriesEntryRecord& record) override;
  Result<void> finish_entry(std::int64_t entry_id, const std::string& status,
                            const std::string& note) override;
  Result<std::int64_t> add_determination(const DeterminationRecord& record) override;
  Result<std::int64_t> add_entry_result(const EntryResultRecord& record) override;
  Result<std::int64_t> add_burette_check(const BuretteCheckRecord& record) override;
  Result<SeriesRecord> load_series(std::int64_t series_id) override;
  Result<std::vector<SeriesRecord>> list_series() override;
  Result<std::vector<SeriesEntryRecord>> load_entries(std::int64_t series_id) override;
  Result<std::vector<DeterminationRecord>> load_determinations(std::int64_t entry_id) override;
  Result<std::vector<EntryResultRecord>> load_entry_results(std::int64_t entry_id) override;
  Result<std::vector<BuretteCheckRecord>> burette_check_history(
      const std::string& burette) override;

  /// Runs still marked running when the store was opened, now marked interrupted.
  int interrupted_on_open() const { return interrupted_on_open_; }

  /// A run cut off by a crash may have left its burette dosing. Marking it
  /// interrupted also records that a stop is owed to its burette, in the
  /// same statement; the record stays until stop_delivered() says the
  /// burette confirmed a stop. So a start that dies between marking and
  /// stopping, or a burette that cannot be reached, leaves the stop owed
  /// for the next start.
  struct OwedStop {
    std::int64_t run_id = 0;
    std::string burette;  ///< the run's burette as recorded (BuretteClient::describe())
  };
  /// Every stop still owed, oldest run first.
  Result<std::vector<OwedStop>> stops_owed();
  /// The burette of run_id has confirmed a stop since the run was cut off.
  Result<void> stop_delivered(std::int64_t run_id);
  const std::string& path() const { return path_; }
  /// Schema version of the open file.
  Result<int> schema_version();

 private:
  // The audit trail lives in the same file and works on the same connection.
  friend class AuditTrail;
  SqliteStore(sqlite3* db, std::string path);
  Result<void> exec(const char* sql);
  Error storage_error(const std::string& what) const;
  /// Held for each public call (recursive: a call may make another).
  std::unique_lock<std::recursive_mutex> serialize() const {
    return std::unique_lock<std::recursive_mutex>(mutex_);
  }

  sqlite3* db_;
  std::string path_;
  int interrupted_on_open_ = 0;
  mutable std::recursive_mutex mutex_;
};

/// The SQL of migration `target` (1-based: it brings schema target-1 to
/// target), or nullptr. For tests that build a file of an older schema.
const char* schema_migration_sql(int target);

/// This process as the owner of the runs and series it starts: the boot's
/// id, the process id and its start time ("boot/pid/ticks"), so that a later
/// process with the same id is not taken for it.
std::string process_owner_token();
/// Whether the process a token names is still running on this machine. A
/// token of another boot or machine, or an empty one, is not alive.
bool owner_is_alive(const std::string& token);

/// Current time as ISO 8601 UTC with milliseconds ("2026-12-02T01:48:22.123Z").
std::string utc_now_iso8601();

}  // namespace veq::store
