// A titration as a plain sequential procedure that walks through recorded
// states: prepare, fill, initial addition, titrate, evaluate, rinse. It adds
// titrant as its dosing strategy says, accepts settled readings, stores every
// point as it is measured, stops on the method's stop conditions, evaluates
// and computes the result.
#pragma once

#include <atomic>
#include <cstdint>
#include <optional>
#include <string>
#include <vector>

#include <nlohmann/json.hpp>

#include "controller/dosing.hpp"
#include "controller/store/run_store.hpp"
#include "detection/derivative.hpp"
#include "drivers/burette_client.hpp"
#include "drivers/clock.hpp"
#include "drivers/sensor_client.hpp"

namespace veq::controller {

/// When a reading counts as settled.
struct SettlingRule {
  /// Readings used for the drift, the last window_s seconds (s); a reading is
  /// judged only once this much time has passed since the dose. 10 s spans
  /// eleven readings: 0.1 mV noise then shakes the slope by about 0.6 mV/min.
  double window_s = 10.0;
  /// Largest accepted drift, |least-squares slope| (mV/min). 1 mV/min is the
  /// order used for ion-selective electrodes in titrations (common practice).
  double drift_limit_per_min = 1.0;
  /// Shortest wait after a dose before a reading may be accepted (s), so that
  /// stirring has mixed the titrant in.
  double min_wait_s = 3.0;
  /// Longest wait (s); then the reading is taken as it is and its drift kept.
  double max_wait_s = 60.0;
  /// Time between readings while waiting (s).
  double read_interval_s = 1.0;
  /// For metals that react slowly: when the last dose moved the signal by more
  /// than `slow_change` (a sign of the steep region near the endpoint), the
  /// shortest wait and the drift window are multiplied by this factor. 1 = off.
  double slow_reaction_factor = 1.0;
  double slow_change = 10.0;
};

/// Settings of a titration.
struct TitrationMethod {
  std::string name = "titration";
  DosingPlan dosing;
  double initial_volume_ml = 0.0;  ///< added at once before the first reading, mL
  double max_volume_ml = 25.0;     ///< never dose beyond this burette reading, mL
  /// Stop this far past the last endpoint found by detection, mL (strategies
  /// that decide their own end use their own rule).
  double volume_past_endpoint_ml = 1.0;
  /// Volume the lab expects the endpoint at (0: unknown). With it the run
  /// checks the reservoir before starting and stops `volume_past_endpoint_ml`
  /// past it even without a detected endpoint.
  double expected_endpoint_ml = 0.0;
  /// Endpoints the curve passes one after the other (two metals bound in
  /// turn: 2). The stop rule waits until the derivative method finds this
  /// many and stops `volume_past_endpoint_ml` past the last; the outcome
  /// keeps the steepest this many in volume order. 1 to 5; more than 1 only
  /// with strategies that do not decide their own end.
  int endpoint_count = 1;
  /// Stop when the signal passes this value in either direction (0 with
  /// use_signal_limit false: no limit).
  bool use_signal_limit = false;
  double signal_limit = 0.0;
  double time_limit_s = 7200.0;        ///< stop titrating after this long, s
  double vessel_capacity_ml = 150.0;   ///< sample plus titrant must stay below this, mL
  double dose_rate_ml_per_min = 10.0;  ///< dosing rate, mL/min
  double fill_rate_ml_per_min = 30.0;  ///< cylinder filling rate, mL/min
  SettlingRule settling;
  /// The derivative method's options: for the stop rule past the endpoint,
  /// for model-guided dosing's judgement of the endpoint while titrating, and
  /// for the final evaluation when `endpoint_method` is "derivative".
  detection::DerivativeOptions detection;
  /// The endpoint method that gives the run's result from the finished curve,
  /// by its detection::evaluate() name ("derivative", "model", "segments",
  /// "crossing", "gran"), with its options as JSON in `endpoint_options`.
  /// Default "derivative" (with `detection`, and `endpoint_options` empty): it
  /// needs nothing beyond the curve. "model" (option "sample": the sample chemistry) fits the whole
  /// curve, so it loses nothing on the uneven steps of adaptive and
  /// model-guided dosing, where the derivative's local fits see fewer points
  /// across a broad break (docs/titration.md, benchmark). When the chosen
  /// method fails or finds no endpoint, the derivative endpoint is used and
  /// the run's messages say so; both evaluations are stored. An unknown name
  /// or option ends the run in preparation, before any titrant is added.
  std::string endpoint_method = "derivative";
  nlohmann::json endpoint_options = nlohmann::json::object();
};
nlohmann::json to_json(const TitrationMethod& method);

/// What is being titrated, as the lab knows it (no hidden truths).
struct SampleDescription {
  std::string sample_id;
  std::string series;
  double sample_volume_ml = 0.0;  ///< aliquot volume, mL
  std::string metal = "calcium";
  double metal_molar_mass_g_per_mol = 40.078;  ///< IUPAC standard atomic weight of Ca
  double metal_per_titrant = 1.0;              ///< mol metal per mol titrant at the endpoint
  std::string titrant_name = "EDTA";
  double titrant_conc_mol_per_l = 0.0;  ///< titrant concentration (label or titer), mol/L
};

/// The metal content computed from an endpoint.
struct MetalResult {
  double endpoint_ml = 0.0;
  double amount_mmol = 0.0;      ///< metal in the aliquot, mmol
  double conc_mmol_per_l = 0.0;  ///< metal in the sample, mmol/L
  double conc_mg_per_l = 0.0;    ///< metal in the sample, mg/L
};

/// amount = V_endpoint * c_titrant * (metal per titrant); concentration = amount / V_sample.
Result<MetalResult> compute_metal_result(double endpoint_ml, const SampleDescription& sample);

/// An evaluation as the store keeps it (flag names comma-separated): what a
/// run stores, `veq evaluate --run` adds and the desktop's re-evaluation adds.
store::EvaluationRecord evaluation_record(const detection::Evaluation& evaluation);

/// The devices a run uses and the clock it owns.
struct Instruments {
  drivers::BuretteClient& burette;
  drivers::PotentialSensorClient& sensor;
  drivers::Clock& clock;
};

/// States of a run (stored in run events: append-only values).
enum class RunState : int {
  starting = 0,
  preparing = 1,         ///< devices answer, titrant enough, vessel large enough
  filling = 2,           ///< cylinder refilled from the reservoir
  initial_addition = 3,  ///< a set volume added at once
  titrating = 4,
  evaluating = 5,
  rinsing = 6,
  paused = 7,
  completed = 8,
  failed = 9,
  aborted = 10,
};
const char* run_state_name(RunState state);

/// Operator controls, set from any thread, checked by the run between steps.
struct RunControl {
  std::atomic<bool> abort{false};
  std::atomic<bool> pause{false};
  /// A further abort flag the run also obeys, if set: a series' own, so that
  /// the operator's stop reaches the titration running at that moment, not
  /// only the next step.
  const std::atomic<bool>* also_abort = nullptr;
  bool aborted() const { return abort.load() || (also_abort && also_abort->load()); }
};

/// Hears what a run does (the command line prints it, the ui plots it).
class RunObserver {
 public:
  virtual ~RunObserver() = default;
  virtual void on_point(const store::PointRecord&) {}
  virtual void on_message(const std::string&) {}
  virtual void on_state(RunState /*from*/, RunState /*to*/, const std::string& /*reason*/) {}
};

/// How a run ended.
struct RunOutcome {
  std::int64_t run_id = 0;
  store::RunStatus status = store::RunStatus::failed;
  std::string reason;
  std::size_t point_count = 0;
  /// The endpoint the result comes from: with one expected endpoint the
  /// largest break, with more the first of `endpoints`.
  std::optional<detection::Endpoint> endpoint;
  /// Every expected endpoint in volume order (TitrationMethod::endpoint_count).
  std::vector<detection::Endpoint> endpoints;
  /// The stored evaluation the endpoints and results come from (0: none).
  std::int64_t evaluation_id = 0;
  std::optional<MetalResult> result;
  bool burette_stopped = true;    ///< false only if a stop command could not be confirmed
  double titration_time_s = 0.0;  ///< from the first reading to the end of titrating, s
  RunState final_state = RunState::failed;
};

/// Least-squares slope of values against times, per minute (values/min).
double least_squares_slope_per_min(const std::vector<double>& times_s,
                                   const std::vector<double>& values);

/// Runs one titration. Every point is durable in the store before the next
/// dose is commanded; every state transition is recorded with its time and
/// reason. On any device error the burette is told to stop first, then the
/// run is ended with the reason; points already stored stay. `control`, if
/// given, is checked between steps (pause, resume, abort).
RunOutcome run_titration(Instruments& instruments, store::RunStore& store,
                         const SampleDescription& sample, const TitrationMethod& method,
                         RunObserver* observer = nullptr, RunControl* control = nullptr);

}  // namespace veq::controller
