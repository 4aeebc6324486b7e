// What the series runner needs from a store: series with their entries, each
// entry's determinations (one per replicate, pointing at the runs that
// measured it), the entry's results with their statistics, and gravimetric
// burette checks. An interface like RunStore: the controller never sees SQL.
// Determinations, results and burette checks are only ever added.
#pragma once

#include <cstdint>
#include <string>
#include <vector>

#include "common/result.hpp"

namespace veq::store {

/// State of a series (append-only values: they live in database files).
enum class SeriesStatus : int {
  running = 1,
  completed = 2,    ///< every entry ran (some may be flagged)
  stopped = 3,      ///< a failure that makes later results untrustworthy stopped it
  aborted = 4,      ///< stopped on request
  interrupted = 5,  ///< found still running when the store was next opened
};
const char* series_status_name(SeriesStatus status);

struct SeriesRecord {
  std::int64_t id = 0;
  std::string name;
  std::string text;  ///< the series file as run
  std::string software_version;
  std::string started_utc;
  std::string finished_utc;  ///< empty while running
  SeriesStatus status = SeriesStatus::running;
  std::string reason;  ///< why it stopped, or a summary
};

/// State of one entry (stored as text): "running", "done", "flagged"
/// (results stand but are out of limits or incomplete), "failed" (no
/// result), "interrupted".
struct SeriesEntryRecord {
  std::int64_t id = 0;
  std::int64_t series_id = 0;
  int index = 0;     ///< 0, 1, 2... in the order the entries ran
  std::string kind;  ///< series::entry_kind_name
  std::string label;
  std::string method_name;
  int method_version = 0;  ///< 0 when the entry uses no method
  std::string status = "running";
  std::string note;  ///< flags and reasons, one per line
  std::string started_utc;
  std::string finished_utc;
};

/// One determination (one replicate in one vessel) of an entry.
struct DeterminationRecord {
  std::int64_t id = 0;
  std::int64_t entry_id = 0;
  int replicate = 0;        ///< 1, 2, 3... in the order run; repeats and extra replicates too
  int position = 0;         ///< sample-changer position
  std::int64_t run_id = 0;  ///< the titration (0: none, e.g. a calibration standard)
  std::int64_t second_run_id = 0;  ///< the back-titration, if any
  double value = 0.0;              ///< the determination's value in `unit`
  std::string unit;
  bool counted = true;      ///< used in the entry's statistics (false: repeated or failed)
  std::string flags;        ///< comma-separated
  std::string detail_json;  ///< inputs of the value: volumes, titer, blank, portion
  std::string recorded_utc;
};

/// A result of an entry: the mean of its counted determinations with their
/// statistics (sample, blank, titer, check standard), or a calibration's
/// slope and E0.
struct EntryResultRecord {
  std::int64_t id = 0;
  std::int64_t entry_id = 0;
  std::string name;  ///< "calcium", "blank volume", "titer", "slope"...
  double value = 0.0;
  std::string unit;
  int count = 0;
  double sd = 0.0;
  double rsd_percent = 0.0;
  std::string flags;
  std::string detail_json;  ///< statistics, limits, uncertainty budget
};

/// A gravimetric burette check (ISO 8655-6) at one test volume.
struct BuretteCheckRecord {
  std::int64_t id = 0;
  std::int64_t entry_id = 0;  ///< the series entry, 0 if checked outside a series
  std::string burette;
  double nominal_volume_ml = 0.0;
  double test_volume_ml = 0.0;
  std::vector<double> water_masses_g;
  double water_temperature_c = 20.0;
  double mean_volume_ml = 0.0;
  double systematic_error_percent = 0.0;
  double random_error_percent = 0.0;
  bool passed = false;
  std::string limits_source;
  std::string checked_utc;
};

class SeriesStore {
 public:
  virtual ~SeriesStore() = default;
  virtual Result<std::int64_t> begin_series(const std::string& name, const std::string& text) = 0;
  virtual Result<void> finish_series(std::int64_t series_id, SeriesStatus status,
                                     const std::string& reason) = 0;
  /// Adds an entry as running; `record.id`, status and times are filled in.
  virtual Result<std::int64_t> begin_entry(const SeriesEntryRecord& record) = 0;
  /// Ends a running entry; refused for an entry already ended.
  virtual Result<void> finish_entry(std::int64_t entry_id, const std::string& status,
                                    const std::string& note) = 0;
  virtual Result<std::int64_t> add_determination(const DeterminationRecord& record) = 0;
  virtual Result<std::int64_t> add_entry_result(const EntryResultRecord& record) = 0;
  virtual Result<std::int64_t> add_burette_check(const BuretteCheckRecord& record) = 0;

  virtual Result<SeriesRecord> load_series(std::int64_t series_id) = 0;
  virtual Result<std::vector<SeriesRecord>> list_series() = 0;
  virtual Result<std::vector<SeriesEntryRecord>> load_entries(std::int64_t series_id) = 0;
  virtual Result<std::vector<DeterminationRecord>> load_determinations(std::int64_t entry_id) = 0;
  virtual Result<std::vector<EntryResultRecord>> load_entry_results(std::int64_t entry_id) = 0;
  /// Every check of a burette, oldest first.
  virtual Result<std::vector<BuretteCheckRecord>> burette_check_history(
      const std::string& burette) = 0;
};

}  // namespace veq::store
