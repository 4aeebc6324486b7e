// Runs a series unattended: for each entry the sample changer brings the
// vessel, the method's steps run (reagents, pH, waiting, titrations,
// evaluation, rinsing), and each determination is stored with the runs that
// measured it. Calibration, burette check, titer and blank entries feed the
// samples' results; the rules for bad results decide what is repeated,
// flagged, or stops the series.
//
// Rules (docs/series.md):
// - A determination without an endpoint, or with one outside the method's
//   expected range, is repeated once on the entry's next spare position, then
//   flagged and left out of the statistics.
// - When a method's largest replicate difference is exceeded, one extra
//   replicate is run on a spare position; the entry is flagged if the values
//   still disagree.
// - A result outside the method's limits is flagged, never hidden.
// - The series goes on past failures of one sample (no endpoint, result out
//   of limits, pH not reached) and stops on failures that make later results
//   untrustworthy: a device error or lost device (burette, doser, sensor,
//   changer, balance), an empty reservoir, an expired or missing titer or
//   calibration, a refused calibration, titer or burette check, a failed
//   check standard. Every point already stored stays; the burette is told to
//   stop before the series ends.
#pragma once

#include <atomic>
#include <cstdint>
#include <map>
#include <optional>
#include <string>
#include <vector>

#include "controller/lab_checks.hpp"
#include "controller/method/method.hpp"
#include "controller/method/titer.hpp"
#include "controller/method/utc_time.hpp"
#include "controller/series/series.hpp"
#include "controller/store/method_store.hpp"
#include "controller/store/run_store.hpp"
#include "controller/store/series_store.hpp"
#include "controller/titration.hpp"
#include "drivers/auxiliary_doser_client.hpp"
#include "drivers/balance_client.hpp"
#include "drivers/burette_client.hpp"
#include "drivers/clock.hpp"
#include "drivers/sample_changer_client.hpp"
#include "drivers/sensor_client.hpp"
#include "drivers/stirrer_client.hpp"

namespace veq::series {

/// One pump of an auxiliary doser, as methods name it ("doser 1").
struct Pump {
  drivers::AuxiliaryDoserClient* doser = nullptr;
  drivers::Reagent reagent = drivers::Reagent::buffer;
};

/// The instruments of a series, by the identities methods use. Every client
/// must have been identified (identify()) before the series starts.
struct SeriesInstruments {
  drivers::Clock& clock;
  drivers::PotentialSensorClient& sensor;
  std::map<std::string, drivers::BuretteClient*> burettes;  ///< "burette 1" -> client
  std::map<std::string, Pump> pumps;                        ///< "doser 1" -> pump
  drivers::SampleChangerClient* changer = nullptr;          ///< none: every entry in the one vessel
  drivers::BalanceClient* balance = nullptr;                ///< for burette checks
  drivers::StirrerClient* stirrer = nullptr;
};

/// The stores a series writes to (one SqliteStore serves all three).
struct SeriesStores {
  store::RunStore& runs;
  store::MethodStore& methods;
  store::SeriesStore& series;
};

struct SeriesOptions {
  /// Wall-clock time at the series' start: the series' "now" is this plus
  /// the instruments' clock, so that virtual-time series date their titers
  /// and calibrations consistently. Default: the system clock at the start.
  std::optional<method::TimePoint> start_time;
  /// Rinsing after each vessel when the method has no rinse step, s.
  double rinse_s = 5.0;
  /// Stirrer speed while a vessel is worked on, rpm. 400: a vortex that mixes
  /// a 50-100 mL beaker within seconds without drawing air (common practice).
  double stirrer_rpm = 400.0;
  /// Pumping rate of reagents and of the excess titrant, mL/min.
  double reagent_rate_ml_per_min = 10.0;
  double titrant_add_rate_ml_per_min = 10.0;
  /// Adjusting pH: the first trial dose, mL; later doses are sized from the
  /// pH change the earlier ones caused, within [smallest, largest].
  double ph_first_dose_ml = 0.05;
  double ph_smallest_dose_ml = 0.005;
  double ph_largest_dose_ml = 0.5;
  double ph_wait_s = 10.0;  ///< after each dose before the pH is read, s
  /// Volume of water a weighed portion is dissolved in, mL (for the dosing
  /// strategy's dilution and the run's record).
  double dissolved_in_ml = 50.0;
  method::TiterOptions titer;
  controller::CalibrationOptions calibration;
  /// Relative standard uncertainty of a burette volume for the budget, from
  /// the ISO 8655-3 systematic limit of a 20 mL burette (0.2 %) as a
  /// rectangular distribution: 0.2 %/√3.
  double burette_relative_uncertainty = 0.002 / 1.7320508075688772;
};

class SeriesObserver : public controller::RunObserver {
 public:
  /// An entry starts (kind name, label).
  virtual void on_entry(const std::string& /*kind*/, const std::string& /*label*/) {}
  /// A determination was stored.
  virtual void on_determination(const store::DeterminationRecord&) {}
  /// An entry ended with its status ("done", "flagged", "failed") and note.
  virtual void on_entry_end(const std::string& /*label*/, const std::string& /*status*/,
                            const std::string& /*note*/) {}
};

struct EntryOutcome {
  /// One named result of the entry, as its entry_results row names it.
  struct Named {
    std::string name;  ///< the analyte, "blank volume", "titer concentration"...
    std::vector<double> values;
    std::optional<double> mean;
    std::string unit;
    std::string flags;  ///< "; "-separated, as stored
  };
  std::int64_t entry_id = 0;
  EntryKind kind = EntryKind::sample;
  std::string label;
  std::string status;  ///< "done", "flagged", "failed", "skipped"
  std::string note;
  /// Counted values and their mean (unit as stored), if the entry has a
  /// value: of the method's first result when it has several.
  std::vector<double> values;
  std::optional<double> mean;
  std::string unit;
  /// Every result of a titrating entry (one per result rule of a sample's or
  /// blank's method; one for a titer or check standard), in the method's order.
  std::vector<Named> results;
  std::vector<std::int64_t> run_ids;
};

struct SeriesOutcome {
  std::int64_t series_id = 0;
  store::SeriesStatus status = store::SeriesStatus::stopped;
  std::string reason;
  std::vector<EntryOutcome> entries;
  bool burettes_stopped = true;  ///< false only if a stop could not be confirmed
};

/// Runs every entry of `series` in order (check standards also every N
/// samples, as the series says). `text` is the series file as written, kept
/// with the series. `abort`, if given, is checked between steps.
SeriesOutcome run_series(const Series& series, const std::string& text,
                         SeriesInstruments& instruments, SeriesStores& stores,
                         const SeriesOptions& options = {}, SeriesObserver* observer = nullptr,
                         const std::atomic<bool>* abort = nullptr);

}  // namespace veq::series
