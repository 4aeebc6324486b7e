// What the controller needs from a store of runs, points, evaluations and
// results. The controller sees this interface, never SQL, so that a shared
// server database can stand behind it later.
#pragma once

#include <cstdint>
#include <optional>
#include <string>
#include <vector>

#include "common/result.hpp"

namespace veq::store {

/// State of a run as stored (append-only values: they live in database files).
enum class RunStatus : int {
  running = 1,      ///< started, not yet ended
  completed = 2,    ///< ended normally with an evaluation
  failed = 3,       ///< ended by a device or procedure error (reason recorded)
  aborted = 4,      ///< stopped on request
  interrupted = 5,  ///< found still "running" when the store was next opened
  imported = 6,     ///< curve imported from a file, not measured here
};
const char* run_status_name(RunStatus status);

/// A run about to start.
struct NewRun {
  std::string sample_id;
  std::string series;  ///< series name, may be empty
  std::string method_name;
  std::string method_json;        ///< the method's full settings as JSON
  int signal_kind = 1;            ///< detection::SignalKind value
  double sample_volume_ml = 0.0;  ///< sample volume (or 0 if a weighed sample)
  std::string titrant_name;
  double titrant_conc_mol_per_l = 0.0;
  std::string burette;  ///< burette identity and line
  std::string sensor;   ///< sensor identity and line
};

/// A stored run.
struct RunRecord {
  std::int64_t id = 0;
  NewRun run;
  std::string software_version;
  std::string started_utc;   ///< ISO 8601, UTC
  std::string finished_utc;  ///< empty while running
  RunStatus status = RunStatus::running;
  std::string end_reason;
  std::int64_t point_count = 0;
};

/// One measured point, exactly as it was accepted.
struct PointRecord {
  std::int64_t index = 0;      ///< 0, 1, 2... within the run
  double time_s = 0.0;         ///< run time when accepted, s
  double volume_ml = 0.0;      ///< burette reading, mL
  double signal = 0.0;         ///< in the run's signal unit
  double temperature_c = 0.0;  ///< °C
  double drift_per_min = 0.0;  ///< signal drift when accepted, signal units per minute
  double settle_s = 0.0;       ///< time from the end of the dose to acceptance, s
};

struct EndpointRecord {
  double volume_ml = 0.0;
  double uncertainty_ml = 0.0;  ///< standard uncertainty, mL
  double signal = 0.0;
  double steepness = 0.0;  ///< |d signal / d volume| at the endpoint
  std::string flags;       ///< comma-separated quality flag names
};

/// One evaluation of a run's curve by one endpoint method. Evaluations are
/// only ever added; re-evaluating a run adds another.
struct EvaluationRecord {
  std::int64_t id = 0;
  std::int64_t run_id = 0;
  std::string method;
  std::string options_json;
  std::string flags;
  std::string created_utc;
  std::vector<EndpointRecord> endpoints;
};

/// A computed result (amount, concentration...) with its unit.
struct ResultRecord {
  std::int64_t id = 0;
  std::int64_t run_id = 0;
  std::int64_t evaluation_id = 0;
  std::string name;  ///< "metal_conc_mol_per_l", "metal_mg_per_l", ...
  double value = 0.0;
  std::string unit;
};

/// A state transition of a run (states are controller::RunState values).
struct RunEvent {
  double time_s = 0.0;  ///< run clock time of the transition, s
  int from_state = 0;
  int to_state = 0;
  std::string reason;
  std::string recorded_utc;  ///< filled in by the store
};

class RunStore {
 public:
  virtual ~RunStore() = default;
  virtual Result<std::int64_t> begin_run(const NewRun& run) = 0;
  /// Durable when it returns: the point survives a crash from then on.
  virtual Result<void> append_point(std::int64_t run_id, const PointRecord& point) = 0;
  virtual Result<void> finish_run(std::int64_t run_id, RunStatus status,
                                  const std::string& reason) = 0;
  virtual Result<std::int64_t> add_evaluation(std::int64_t run_id,
                                              const EvaluationRecord& evaluation) = 0;
  virtual Result<std::int64_t> add_result(const ResultRecord& result) = 0;
  /// Stores a curve measured elsewhere as a run with status `imported`, all of
  /// its points in one transaction: either everything is stored or nothing.
  virtual Result<std::int64_t> import_run(const NewRun& run, const std::vector<PointRecord>& points,
                                          const std::string& origin) = 0;

  virtual Result<RunRecord> load_run(std::int64_t run_id) = 0;
  virtual Result<std::vector<RunRecord>> list_runs() = 0;
  virtual Result<std::vector<PointRecord>> load_points(std::int64_t run_id) = 0;
  virtual Result<std::vector<EvaluationRecord>> load_evaluations(std::int64_t run_id) = 0;
  virtual Result<std::vector<ResultRecord>> load_results(std::int64_t run_id) = 0;
  /// Records a state transition; durable when it returns.
  virtual Result<void> record_event(std::int64_t run_id, const RunEvent& event) = 0;
  virtual Result<std::vector<RunEvent>> load_events(std::int64_t run_id) = 0;
};

}  // namespace veq::store
