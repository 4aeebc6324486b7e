// A fixed-increment titration as a plain sequential procedure: fill, add
// increments, accept settled readings, store every point as it is measured,
// stop past the endpoint, evaluate and compute the result.
#pragma once

#include <atomic>
#include <cstdint>
#include <optional>
#include <string>
#include <vector>

#include <nlohmann/json.hpp>

#include "controller/store/run_store.hpp"
#include "detection/derivative.hpp"
#include "drivers/burette_client.hpp"
#include "drivers/clock.hpp"
#include "drivers/sensor_client.hpp"

namespace veq::controller {

/// When a reading counts as settled.
struct SettlingRule {
  /// Readings used for the drift, the last window_s seconds (s). 10 s spans
  /// ten readings: enough to average 0.1 mV noise to about 0.6 mV/min.
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
};

/// Settings of a fixed-increment titration.
struct FixedIncrementMethod {
  std::string name = "fixed increments";
  double increment_ml = 0.05;            ///< volume of every dose, mL
  double max_volume_ml = 25.0;           ///< never dose beyond this burette reading, mL
  double volume_past_endpoint_ml = 1.0;  ///< stop this far past a found endpoint, mL
  double dose_rate_ml_per_min = 10.0;    ///< dosing rate, mL/min
  double fill_rate_ml_per_min = 30.0;    ///< cylinder filling rate, mL/min
  SettlingRule settling;
  detection::DerivativeOptions detection;
};
nlohmann::json to_json(const FixedIncrementMethod& method);

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

/// The devices a run uses and the clock it owns.
struct Instruments {
  drivers::BuretteClient& burette;
  drivers::PotentialSensorClient& sensor;
  drivers::Clock& clock;
};

/// Hears what a run does (the command line prints it, the ui plots it).
class RunObserver {
 public:
  virtual ~RunObserver() = default;
  virtual void on_point(const store::PointRecord&) {}
  virtual void on_message(const std::string&) {}
};

/// How a run ended.
struct RunOutcome {
  std::int64_t run_id = 0;
  store::RunStatus status = store::RunStatus::failed;
  std::string reason;
  std::size_t point_count = 0;
  std::optional<detection::Endpoint> endpoint;
  std::optional<MetalResult> result;
  bool burette_stopped = true;  ///< false only if a stop command could not be confirmed
};

/// Least-squares slope of values against times, per minute (values/min).
double least_squares_slope_per_min(const std::vector<double>& times_s,
                                   const std::vector<double>& values);

/// Runs one titration. Every point is durable in the store before the next
/// dose is commanded. On any device error the burette is told to stop first,
/// then the run is ended with the reason; points already stored stay.
/// `abort`, if given, is checked between steps.
RunOutcome run_fixed_increment_titration(Instruments& instruments, store::RunStore& store,
                                         const SampleDescription& sample,
                                         const FixedIncrementMethod& method,
                                         RunObserver* observer = nullptr,
                                         const std::atomic<bool>* abort = nullptr);

}  // namespace veq::controller
