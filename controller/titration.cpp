#include "controller/titration.hpp"

#include <algorithm>
#include <cmath>
#include <limits>
#include <optional>
#include <sstream>
#include <utility>

#include "detection/crossing.hpp"
#include "detection/curve.hpp"
#include "detection/evaluate.hpp"
#include "detection/gran.hpp"
#include "detection/model_fit.hpp"
#include "detection/segments.hpp"

namespace veq::controller {

namespace {

using drivers::from_seconds;

// Outlying readings while a point settles (an electrode spike, a burst of
// interference). A signal that settles after a dose moves one way only
// (the electrode's response is a first-order lag, without overshoot), so a
// reading, or two in a row, that stands out above (or below) the kept
// readings on both sides by more than a limit is an outlier: it is left out
// of the drift and never becomes the point's signal. The newest reading has
// no reading after it yet; it may become the point's signal only when it
// lies within the limit of the kept reading before it, or of the line
// through the two kept readings before it.
//
// Smallest limit, mV: far beyond the noise of a working electrode (0.1 mV
// or less) and beyond what a drift of 1 mV/min moves between readings, so
// that a noise-free or quiet signal never loses a reading to it.
constexpr double kOutlierFloorMv = 1.0;
// The limit is this many standard deviations of the readings' noise.
// Eight: Gaussian noise alone reaches it about once in 10^15 readings. The
// standard deviation comes from the differences between successive readings
// in the window, from their lower quartile (for Gaussian readings of
// standard deviation s, the lower quartile of |difference| is
// 0.3186 sqrt(2) s = s / 2.22): it stays sound while a quarter of the pairs
// are free of spikes, so that a burst of spikes does not widen the limit
// that is to catch them, and while the signal still moves fast the limit
// follows its pace.
constexpr double kOutlierSigmas = 8.0;
// Differences between successive readings in the window needed before the
// limit is set; before that, no reading is judged (a point is accepted only
// after a whole window of readings, eleven at the default settling rule).
constexpr std::size_t kOutlierMinDifferences = 4;
// A burst in which most readings are spikes leaves no quiet pair to set the
// limit by: the limit is then held to this many times the median of the
// limits at which the run's earlier points were taken (points taken on a
// settled signal, whose limit reflects the electrode's noise). Four: room
// for a noisier stretch, still far below a spike.
constexpr double kOutlierCapFactor = 4.0;
constexpr std::size_t kOutlierCapPoints = 3;
/// Most endpoints one curve may be expected to pass.
constexpr int kMostEndpoints = 5;
// Readings taken past the longest wait while the newest one is an outlier;
// then the point is not taken at all and the run fails.
constexpr int kOutlierExtraReadings = 10;

// The readings of one point while it settles, each kept or turned away as
// an outlier.
struct SettlingReadings {
  std::vector<double> times_s, values_mv;
  std::vector<char> outlier;         // 1: turned away
  std::vector<double> departure_mv;  // of a reading turned away, from the kept one before it
  double limit_mv = 0.0;             // 0 until the window holds enough readings
  // Largest limit, mV, from the points already taken (see settle_and_record).
  double cap_mv = std::numeric_limits<double>::infinity();

  void add(double t_s, double value_mv, std::size_t first) {
    times_s.push_back(t_s);
    values_mv.push_back(value_mv);
    outlier.push_back(0);
    departure_mv.push_back(0.0);
    const std::size_t k = values_mv.size() - 1;
    std::vector<double> differences;
    for (std::size_t j = first + 1; j <= k; ++j)
      differences.push_back(std::abs(values_mv[j] - values_mv[j - 1]));
    if (differences.size() < kOutlierMinDifferences) {
      limit_mv = 0.0;
      return;
    }
    const auto quarter = differences.begin() + static_cast<std::ptrdiff_t>(differences.size() / 4);
    std::nth_element(differences.begin(), quarter, differences.end());
    limit_mv = std::min(cap_mv, std::max(kOutlierFloorMv, kOutlierSigmas * 2.22 * *quarter));
    // The reading before the newest, or the two before it, standing out
    // from the kept reading before them and from the newest alike.
    for (std::size_t run = 1; run <= 2 && run < k; ++run) {
      const std::size_t start = k - run;
      const auto left = kept_before(start);
      if (!left)
        break;
      bool stands_out = true;
      for (std::size_t j = start; j < k && stands_out; ++j) {
        const double from_left = values_mv[j] - values_mv[*left];
        const double from_right = values_mv[j] - values_mv[k];
        stands_out = std::abs(from_left) > limit_mv && std::abs(from_right) > limit_mv &&
                     (from_left > 0.0) == (from_right > 0.0) && !outlier[j];
      }
      if (stands_out) {
        for (std::size_t j = start; j < k; ++j) {
          outlier[j] = 1;
          departure_mv[j] = values_mv[j] - values_mv[*left];
        }
        break;
      }
    }
  }

  // The last kept reading before `index`.
  std::optional<std::size_t> kept_before(std::size_t index) const {
    for (std::size_t j = index; j-- > 0;) {
      if (!outlier[j])
        return j;
    }
    return std::nullopt;
  }

  // Whether the newest reading may be the point's signal (see above),
  // and the kept reading before it agrees with its own predecessors too (a
  // spike followed by a second on the same side is not turned away until
  // the reading after them returns); always while the limit is not set.
  bool newest_acceptable() const {
    if (limit_mv <= 0.0)
      return true;
    const std::size_t k = values_mv.size() - 1;
    const auto before = kept_before(k);
    return agrees(k) && (!before || agrees(*before));
  }

  // Whether reading i lies within the limit of the kept reading before it,
  // or of the line through the two kept readings before it.
  bool agrees(std::size_t i) const {
    const auto a = kept_before(i);
    if (!a || std::abs(values_mv[i] - values_mv[*a]) <= limit_mv)
      return true;
    const auto b = kept_before(*a);
    if (!b || !(times_s[*a] > times_s[*b]))
      return false;
    const double pace = (values_mv[*a] - values_mv[*b]) / (times_s[*a] - times_s[*b]);
    return std::abs(values_mv[i] - (values_mv[*a] + pace * (times_s[i] - times_s[*a]))) <= limit_mv;
  }

  // The readings turned away, and the largest departure among them (mV).
  std::pair<int, double> rejected() const {
    int count = 0;
    double largest = 0.0;
    for (std::size_t j = 0; j < outlier.size(); ++j) {
      if (outlier[j]) {
        ++count;
        largest = std::max(largest, std::abs(departure_mv[j]));
      }
    }
    return {count, largest};
  }
};

std::string fixed(double v, int decimals) {
  std::ostringstream s;
  s.setf(std::ios::fixed);
  s.precision(decimals);
  s << v;
  return s.str();
}

std::string flag_names(const std::vector<detection::QualityFlag>& flags) {
  std::string out;
  for (auto f : flags) {
    if (!out.empty())
      out += ',';
    out += detection::quality_flag_name(f);
  }
  return out;
}

/// Whole-curve flags that make an evaluation unfit to give the result.
std::vector<detection::QualityFlag> doubtful_flags(
    const std::vector<detection::QualityFlag>& flags) {
  std::vector<detection::QualityFlag> out;
  for (auto f : {detection::QualityFlag::poor_fit, detection::QualityFlag::fit_not_converged}) {
    if (detection::has_flag(flags, f))
      out.push_back(f);
  }
  return out;
}

/// The final endpoint method and its options, checked before any titrant is
/// added, so that a misspelt name or option does not surface only after the
/// whole titration.
Result<void> check_endpoint_method(const TitrationMethod& m) {
  const auto where = [&](const Error& e) {
    return make_error(ErrorKind::invalid_input,
                      "endpoint method '" + m.endpoint_method + "': " + e.message);
  };
  const nlohmann::json& o = m.endpoint_options;
  if (m.endpoint_method == "derivative") {
    // One set of derivative options serves the stop rule and the result.
    if (!o.is_null() && !o.empty()) {
      return make_error(ErrorKind::invalid_input,
                        "endpoint method 'derivative' takes its options from the method's "
                        "derivative settings; leave the endpoint options empty");
    }
  } else if (m.endpoint_method == "segments") {
    if (auto r = detection::segments_options_from_json(o); !r)
      return where(r.error());
  } else if (m.endpoint_method == "crossing") {
    if (auto r = detection::crossing_options_from_json(o); !r)
      return where(r.error());
  } else if (m.endpoint_method == "gran") {
    if (auto r = detection::gran_options_from_json(o); !r)
      return where(r.error());
  } else if (m.endpoint_method == "model") {
    auto r = detection::model_fit_options_from_json(o);
    if (!r)
      return where(r.error());
    if (!r->sample) {
      return make_error(ErrorKind::invalid_input,
                        "endpoint method 'model' needs the sample chemistry as its option "
                        "'sample' (a sample document, docs/chemistry.md)");
    }
  } else {
    std::string known;
    for (auto name : detection::method_names())
      known += (known.empty() ? "" : ", ") + std::string(name);
    return make_error(ErrorKind::invalid_input,
                      "unknown endpoint method '" + m.endpoint_method + "'; known: " + known);
  }
  return {};
}

/// One titration in progress; the procedure reads top to bottom in run().
class Titration {
 public:
  Titration(Instruments& inst, store::RunStore& store, const SampleDescription& sample,
            const TitrationMethod& method, RunObserver* observer, RunControl* control)
      : inst_(inst),
        store_(store),
        sample_(sample),
        method_(method),
        observer_(observer),
        control_(control),
        strategy_(
            make_dosing_strategy(method.dosing, sample.sample_volume_ml, method.detection,
                                 EndpointJudge{method.endpoint_method, method.endpoint_options},
                                 method.endpoint_count)) {}

  RunOutcome run() {
    store::NewRun record;
    record.sample_id = sample_.sample_id;
    record.series = sample_.series;
    record.method_name = method_.name;
    record.method_json = to_json(method_).dump();
    record.signal_kind = static_cast<int>(detection::SignalKind::potential_mv);
    record.sample_volume_ml = sample_.sample_volume_ml;
    record.titrant_name = sample_.titrant_name;
    record.titrant_conc_mol_per_l = sample_.titrant_conc_mol_per_l;
    record.burette = inst_.burette.describe();
    record.sensor = inst_.sensor.describe();
    auto run_id = store_.begin_run(record);
    if (!run_id) {
      outcome_.reason = run_id.error().describe();
      return outcome_;
    }
    outcome_.run_id = *run_id;

    if (auto r = prepare(); !r)
      return end_with_error(r.error());
    if (auto r = fill_cylinder(); !r)
      return end_with_error(r.error());
    if (auto r = initial_addition(); !r)
      return end_with_error(r.error());
    if (auto r = titrate(); !r)
      return end_with_error(r.error());
    return evaluate_and_finish();
  }

 private:
  // ---- states -------------------------------------------------------------

  Result<void> prepare() {
    enter(RunState::preparing, "run started");
    auto burette = inst_.burette.identify();
    if (!burette)
      return burette.error();
    auto sensor = inst_.sensor.identify();
    if (!sensor)
      return sensor.error();
    say("burette " + burette->model + ", " + fixed(burette->cylinder_ml, 1) +
        " mL cylinder; electrode " + sensor->electrode);
    // Rates never above the device's limits (the method's are ours already).
    if (method_.dose_rate_ml_per_min > burette->max_rate_ml_per_min ||
        method_.fill_rate_ml_per_min > burette->max_rate_ml_per_min) {
      return make_error(ErrorKind::invalid_input, "method rates exceed the burette's maximum of " +
                                                      fixed(burette->max_rate_ml_per_min, 2) +
                                                      " mL/min");
    }
    if (largest_step_ml() > burette->max_dose_ml) {
      return make_error(ErrorKind::invalid_input, "the method's largest step of " +
                                                      fixed(largest_step_ml(), 3) +
                                                      " mL exceeds the burette's largest dose of " +
                                                      fixed(burette->max_dose_ml, 3) + " mL");
    }
    if (method_.endpoint_count < 1 || method_.endpoint_count > kMostEndpoints) {
      return make_error(ErrorKind::invalid_input,
                        "the method expects " + std::to_string(method_.endpoint_count) +
                            " endpoints; 1 to " + std::to_string(kMostEndpoints) + " are possible");
    }
    if (method_.endpoint_count > 1 && strategy_->decides_its_own_end()) {
      return make_error(ErrorKind::invalid_input,
                        std::string("dosing '") + dosing_kind_name(method_.dosing.kind) +
                            "' ends the titration at its first endpoint; a curve with " +
                            std::to_string(method_.endpoint_count) +
                            " endpoints needs fixed or adaptive increments");
    }
    if (auto r = check_endpoint_method(method_); !r)
      return r.error();
    // The vessel must hold the sample and every drop the method may add.
    if (sample_.sample_volume_ml + method_.max_volume_ml > method_.vessel_capacity_ml) {
      return make_error(ErrorKind::invalid_input,
                        "sample " + fixed(sample_.sample_volume_ml, 2) + " mL plus up to " +
                            fixed(method_.max_volume_ml, 2) + " mL of titrant exceeds the " +
                            fixed(method_.vessel_capacity_ml, 1) +
                            " mL vessel; lower the maximum volume or use a larger vessel");
    }
    if (auto r = inst_.burette.arm_host_silence_stop(); !r)
      return r.error();
    auto status = inst_.burette.status();
    if (!status)
      return status.error();
    const double expected = method_.expected_endpoint_ml > 0.0
                                ? method_.expected_endpoint_ml + method_.volume_past_endpoint_ml
                                : 0.0;
    if (status->reservoir_ml >= 0.0 && expected > 0.0 &&
        status->reservoir_ml + status->cylinder_content_ml < expected) {
      return make_error(ErrorKind::device_fault,
                        "only " + fixed(status->reservoir_ml + status->cylinder_content_ml, 1) +
                            " mL of titrant left for an expected " + fixed(expected, 2) +
                            " mL; refill the reservoir");
    }
    return check_controls();
  }

  Result<void> fill_cylinder() {
    enter(RunState::filling, "filling the cylinder before titrating");
    auto info = inst_.burette.info();
    if (auto r = refill_if_below(info.cylinder_ml); !r)
      return r;
    if (auto r = inst_.burette.reset_counter(); !r)
      return r.error();
    return check_controls();
  }

  Result<void> initial_addition() {
    if (method_.initial_volume_ml <= 0.0)
      return {};
    enter(RunState::initial_addition,
          "adding " + fixed(method_.initial_volume_ml, 3) + " mL before the first reading");
    double left = method_.initial_volume_ml;
    const double largest = inst_.burette.info().max_dose_ml;
    while (left > 1e-9) {
      const double dose = std::min(left, largest);
      if (auto r = refill_if_below(dose); !r)
        return r;
      auto dosed = inst_.burette.dose(dose, method_.dose_rate_ml_per_min);
      if (!dosed)
        return dosed.error();
      left -= dose;
      volume_ml_ = dosed->delivered_ml;
      if (auto r = check_controls(); !r)
        return r;
    }
    return {};
  }

  Result<void> titrate() {
    enter(RunState::titrating,
          "titrating by " + std::string(dosing_kind_name(method_.dosing.kind)));
    start_s_ = inst_.clock.now_s();
    if (auto r = settle_and_record(volume_ml_, inst_.clock.now(), 0.0); !r)
      return r;
    while (true) {
      if (auto r = check_controls(); !r)
        return r;
      if (inst_.clock.now_s() - start_s_ > method_.time_limit_s) {
        stop_reason_ = "time limit of " + fixed(method_.time_limit_s, 0) + " s reached";
        return {};
      }
      const DoseDecision next =
          strategy_->next(CurveSoFar{volumes_, signals_, method_.max_volume_ml, &times_});
      if (next.finished) {
        stop_reason_ = next.reason;
        strategy_endpoint_ml_ = next.endpoint_ml;
        return {};
      }
      if (next.volume_ml <= 0.0) {
        // The strategy wants to watch the signal without adding titrant.
        inst_.clock.sleep_for(from_seconds(next.wait_s));
        if (auto r = settle_and_record(volume_ml_, inst_.clock.now(), 0.0); !r)
          return r;
        continue;
      }
      double dose = std::min(next.volume_ml, inst_.burette.info().max_dose_ml);
      if (volume_ml_ + dose > method_.max_volume_ml + 1e-9) {
        dose = method_.max_volume_ml - volume_ml_;
        if (dose < 1e-6) {
          stop_reason_ = "maximum volume of " + fixed(method_.max_volume_ml, 2) + " mL reached";
          return {};
        }
      }
      if (auto r = refill_if_below(dose); !r)
        return r;
      const double before_signal = signals_.back();
      auto dosed = inst_.burette.dose(dose, method_.dose_rate_ml_per_min);
      if (!dosed)
        return dosed.error();
      volume_ml_ = dosed->delivered_ml;
      if (auto r = settle_and_record(volume_ml_, inst_.clock.now(), before_signal); !r)
        return r;
      if (stop_condition_met())
        return {};
    }
  }

  RunOutcome evaluate_and_finish() {
    outcome_.titration_time_s = inst_.clock.now_s() - start_s_;
    enter(RunState::evaluating, stop_reason_);
    // An abort here still ends the run as aborted (the burette is told to
    // stop all the same); the points stay stored for a later evaluation.
    if (auto r = check_controls(); !r)
      return end_with_error(r.error());
    auto c = curve();
    if (!c)
      return end_with_error(c.error());
    // The derivative evaluation is always made and stored: the stop rule used
    // it, and it is the fallback when another chosen method fails.
    const auto by_derivative = detection::find_endpoints_by_derivative(*c, method_.detection);
    auto derivative_id = store_evaluation(by_derivative);
    if (!derivative_id)
      return end_with_error(derivative_id.error());
    std::int64_t evaluation_id = *derivative_id;
    std::vector<detection::Endpoint> endpoints = expected_breaks(by_derivative);
    const auto found_text = [&](const detection::Evaluation& ev) {
      return method_.endpoint_count == 1
                 ? std::string("found no endpoint")
                 : "found " + std::to_string(ev.endpoints.size()) + " of the " +
                       std::to_string(method_.endpoint_count) + " endpoints expected";
    };
    if (method_.endpoint_method != "derivative") {
      auto chosen = detection::evaluate(*c, method_.endpoint_method, method_.endpoint_options);
      if (!chosen) {
        say("the " + method_.endpoint_method + " method failed (" + chosen.error().message +
            "); the endpoint is the derivative method's");
      } else {
        auto chosen_id = store_evaluation(*chosen);
        if (!chosen_id)
          return end_with_error(chosen_id.error());
        const auto doubtful = std::string(flag_names(doubtful_flags(chosen->flags)));
        auto best = expected_breaks(*chosen);
        if (!best.empty() && doubtful.empty()) {
          endpoints = std::move(best);
          evaluation_id = *chosen_id;
        } else if (!best.empty()) {
          // A fit that does not describe the curve does not give the result.
          say("the " + method_.endpoint_method + " method's evaluation is flagged " + doubtful +
              "; the endpoint is the derivative method's");
        } else {
          say("the " + method_.endpoint_method + " method " + found_text(*chosen) +
              "; the endpoint is the derivative method's");
        }
      }
    }
    if (method_.dosing.kind == DosingKind::approach_preset_signal) {
      // The endpoint of a titration to a preset signal is where it was held.
      endpoints.clear();
      if (strategy_endpoint_ml_ > 0.0) {
        detection::Endpoint e;
        e.volume_ml = strategy_endpoint_ml_;
        e.signal = method_.dosing.preset_signal;
        e.uncertainty_ml = inst_.burette.info().cylinder_ml /
                           std::max(1.0, inst_.burette.info().steps_per_cylinder);
        endpoints.push_back(e);
      }
    }
    if (auto r = rinse(); !r)
      return end_with_error(r.error());
    if (endpoints.empty()) {
      outcome_.status = store::RunStatus::failed;
      outcome_.reason =
          method_.endpoint_count == 1 || method_.dosing.kind == DosingKind::approach_preset_signal
              ? "no endpoint found (" + stop_reason_ + ")"
              : "no endpoint found: the derivative method " + found_text(by_derivative) + " (" +
                    stop_reason_ + ")";
      finish(RunState::failed, outcome_.reason);
      return outcome_;
    }
    const std::optional<detection::Endpoint> endpoint = endpoints.front();
    outcome_.endpoints = endpoints;
    outcome_.evaluation_id = evaluation_id;
    outcome_.endpoint = endpoint;
    auto result = compute_metal_result(endpoint->volume_ml, sample_);
    if (!result)
      return end_with_error(result.error());
    outcome_.result = *result;
    const std::pair<const char*, std::pair<double, const char*>> rows[] = {
        {"endpoint_volume", {result->endpoint_ml, "mL"}},
        {"metal_amount", {result->amount_mmol, "mmol"}},
        {"metal_concentration", {result->conc_mmol_per_l, "mmol/L"}},
        {"metal_mass_concentration", {result->conc_mg_per_l, "mg/L"}},
    };
    std::vector<store::ResultRecord> records;
    for (const auto& [name, value] : rows) {
      store::ResultRecord r;
      r.name = name;
      r.value = value.first;
      r.unit = value.second;
      records.push_back(r);
    }
    // The later endpoints of a curve with several: their volumes (the
    // results of each metal are the method's to compute, from all of them).
    for (std::size_t k = 1; k < endpoints.size(); ++k) {
      store::ResultRecord r;
      r.name = "endpoint_volume_" + std::to_string(k + 1);
      r.value = endpoints[k].volume_ml;
      r.unit = "mL";
      records.push_back(r);
    }
    for (auto& r : records) {
      r.run_id = outcome_.run_id;
      r.evaluation_id = evaluation_id;
      if (auto stored = store_.add_result(r); !stored)
        return end_with_error(stored.error());
    }
    outcome_.status = store::RunStatus::completed;
    outcome_.reason = stop_reason_;
    finish(RunState::completed, stop_reason_);
    return outcome_;
  }

  Result<std::int64_t> store_evaluation(const detection::Evaluation& evaluation) {
    return store_.add_evaluation(outcome_.run_id, evaluation_record(evaluation));
  }

  /// The method's expected endpoints: the `endpoint_count` largest breaks
  /// in volume order (one: the largest break, the endpoint of a
  /// single-metal titration); empty when fewer are found.
  std::vector<detection::Endpoint> expected_breaks(const detection::Evaluation& ev) const {
    const auto n = static_cast<std::size_t>(method_.endpoint_count);
    if (ev.endpoints.size() < n)
      return {};
    std::vector<detection::Endpoint> by_steepness = ev.endpoints;
    std::stable_sort(by_steepness.begin(), by_steepness.end(),
                     [](const auto& a, const auto& b) { return a.steepness > b.steepness; });
    by_steepness.resize(n);
    std::sort(by_steepness.begin(), by_steepness.end(),
              [](const auto& a, const auto& b) { return a.volume_ml < b.volume_ml; });
    return by_steepness;
  }

  Result<void> rinse() {
    // No rinsing device is driven yet (the sample changer comes with the
    // drivers for every role); the state is recorded so that the sequence of
    // a run reads the same when one is added.
    enter(RunState::rinsing, "no rinsing device configured: nothing to rinse");
    return check_controls();
  }

  // ---- steps --------------------------------------------------------------

  double largest_step_ml() const {
    switch (method_.dosing.kind) {
      case DosingKind::fixed_increments:
        return method_.dosing.increment_ml;
      default:
        return method_.dosing.largest_step_ml;
    }
  }

  /// Pause waits here; abort ends the run.
  Result<void> check_controls() {
    if (!control_)
      return {};
    if (control_->aborted())
      return make_error(ErrorKind::aborted, "aborted by the operator");
    if (control_->pause.load()) {
      const RunState was = state_;
      enter(RunState::paused, "paused by the operator");
      while (control_->pause.load() && !control_->aborted()) {
        inst_.clock.sleep_for(std::chrono::milliseconds(100));
      }
      if (control_->aborted())
        return make_error(ErrorKind::aborted, "aborted by the operator");
      enter(was, "resumed by the operator");
    }
    return {};
  }

  Result<void> refill_if_below(double needed_ml) {
    auto status = inst_.burette.status();
    if (!status)
      return status.error();
    if (status->cylinder_content_ml + 1e-9 >= needed_ml)
      return {};
    const RunState was = state_;
    const bool announce = was != RunState::filling;
    if (announce) {
      enter(RunState::filling,
            "cylinder holds " + fixed(status->cylinder_content_ml, 3) + " mL, refilling");
    }
    auto filled = inst_.burette.fill(method_.fill_rate_ml_per_min);
    if (!filled)
      return filled.error();
    if (filled->cylinder_content_ml + 1e-9 < needed_ml) {
      return make_error(ErrorKind::device_fault,
                        "the cylinder holds only " + fixed(filled->cylinder_content_ml, 3) +
                            " mL after filling: the titrant reservoir is empty");
    }
    if (announce)
      enter(was, "cylinder refilled");
    return {};
  }

  /// Reads until the drift rule accepts a reading, then stores the point.
  /// Outlying readings (see SettlingReadings) are left out of the drift and
  /// are never the point's signal.
  Result<void> settle_and_record(double volume_ml, drivers::Duration dose_end,
                                 double before_signal) {
    SettlingRule rule = method_.settling;
    SettlingReadings readings;
    if (accepted_limits_mv_.size() >= kOutlierCapPoints) {
      std::vector<double> limits = accepted_limits_mv_;
      const auto middle = limits.begin() + static_cast<std::ptrdiff_t>(limits.size() / 2);
      std::nth_element(limits.begin(), middle, limits.end());
      readings.cap_mv = std::max(kOutlierFloorMv, kOutlierCapFactor * *middle);
    }
    drivers::PotentialReading last{};
    double drift = 0.0;
    bool slow = false;
    int past_longest_wait = 0;
    std::vector<double> wt, wv;
    while (true) {
      if (auto r = check_controls(); !r)
        return r;
      auto reading = inst_.sensor.read();
      if (!reading)
        return reading.error();
      const double t = drivers::to_seconds(inst_.clock.now() - dose_end);
      // The window of the last window_s seconds, this reading included.
      std::size_t first = 0;
      while (first < readings.times_s.size() && t - readings.times_s[first] > rule.window_s + 1e-9)
        ++first;
      readings.add(t, reading->potential_mv, first);
      const bool acceptable = readings.newest_acceptable();
      if (acceptable)
        last = *reading;
      if (!slow && acceptable && !signals_.empty() && rule.slow_reaction_factor > 1.0 &&
          std::abs(reading->potential_mv - before_signal) > rule.slow_change) {
        // Near the endpoint of a slow metal: wait longer, judge drift over
        // longer.
        slow = true;
        rule.min_wait_s *= rule.slow_reaction_factor;
        rule.window_s *= rule.slow_reaction_factor;
      }
      // Drift over the kept readings of the last window_s seconds (the
      // window may have just grown).
      first = 0;
      while (t - readings.times_s[first] > rule.window_s + 1e-9)
        ++first;
      wt.clear();
      wv.clear();
      for (std::size_t j = first; j < readings.times_s.size(); ++j) {
        if (!readings.outlier[j]) {
          wt.push_back(readings.times_s[j]);
          wv.push_back(readings.values_mv[j]);
        }
      }
      // The drift is judged over the whole window: over a shorter span the
      // noise alone makes the slope look small or large by chance.
      const bool enough =
          wt.size() >= 3 && wt.back() - wt.front() >= rule.window_s - 0.5 * rule.read_interval_s;
      drift = enough ? least_squares_slope_per_min(wt, wv) : 0.0;
      if (acceptable && t >= rule.min_wait_s && enough &&
          std::abs(drift) <= rule.drift_limit_per_min)
        break;
      if (t >= rule.max_wait_s) {
        if (acceptable) {
          say("reading at " + fixed(volume_ml, 3) + " mL taken after the longest wait, drift " +
              fixed(drift, 2) + " mV/min");
          break;
        }
        // The newest reading is an outlier: read again, a few times.
        if (++past_longest_wait > kOutlierExtraReadings) {
          const auto [count, largest] = readings.rejected();
          return make_error(ErrorKind::device_fault,
                            "the electrode's readings at " + fixed(volume_ml, 3) +
                                " mL keep jumping: " + std::to_string(count) +
                                " readings rejected as outliers (up to " + fixed(largest, 1) +
                                " mV from the readings before) and none settled; check the "
                                "electrode, its cable and the stirrer");
        }
      }
      inst_.clock.sleep_for(from_seconds(rule.read_interval_s));
    }
    if (readings.limit_mv > 0.0)
      accepted_limits_mv_.push_back(readings.limit_mv);
    if (const auto [count, largest] = readings.rejected(); count > 0) {
      say("point at " + fixed(volume_ml, 3) + " mL: " + std::to_string(count) +
          (count == 1 ? " reading" : " readings") + " rejected as " +
          (count == 1 ? "an outlier" : "outliers") + " (up to " + fixed(largest, 1) +
          " mV from the kept reading before)");
    }
    store::PointRecord point;
    point.index = static_cast<std::int64_t>(volumes_.size());
    point.time_s = inst_.clock.now_s();
    point.volume_ml = volume_ml;
    point.signal = last.potential_mv;
    point.temperature_c = last.temperature_c;
    point.drift_per_min = drift;
    point.settle_s = readings.times_s.back();
    // Durable before the next dose is commanded.
    if (auto stored = store_.append_point(outcome_.run_id, point); !stored) {
      return stored.error();
    }
    volumes_.push_back(volume_ml);
    signals_.push_back(last.potential_mv);
    times_.push_back(point.time_s);
    temperatures_.push_back(last.temperature_c);
    outcome_.point_count = volumes_.size();
    if (observer_)
      observer_->on_point(point);
    return {};
  }

  Result<detection::Curve> curve() const {
    detection::CurveColumns c;
    c.volume_ml = volumes_;
    c.signal = signals_;
    c.time_s = times_;
    c.temperature_c = temperatures_;
    c.kind = detection::SignalKind::potential_mv;
    c.sample_volume_ml = sample_.sample_volume_ml;
    return detection::Curve::from_columns(std::move(c));
  }

  /// The method's stop conditions, checked after each stored point.
  bool stop_condition_met() {
    const double v = volume_ml_;
    if (method_.use_signal_limit && signals_.size() >= 2) {
      const double first = signals_.front();
      const double now = signals_.back();
      if ((first - method_.signal_limit) * (now - method_.signal_limit) <= 0.0) {
        stop_reason_ = "signal reached the limit of " + fixed(method_.signal_limit, 1);
        return true;
      }
    }
    if (v >= method_.max_volume_ml - 1e-9) {
      stop_reason_ = "maximum volume of " + fixed(method_.max_volume_ml, 2) + " mL reached";
      return true;
    }
    if (strategy_->decides_its_own_end())
      return false;
    if (method_.expected_endpoint_ml > 0.0 &&
        v >= method_.expected_endpoint_ml + method_.volume_past_endpoint_ml - 1e-9) {
      stop_reason_ = "stopped " + fixed(method_.volume_past_endpoint_ml, 2) +
                     " mL past the expected endpoint at " + fixed(method_.expected_endpoint_ml, 3) +
                     " mL";
      return true;
    }
    if (volumes_.size() < 5)
      return false;
    auto c = curve();
    if (!c)
      return false;
    const auto evaluation = detection::find_endpoints_by_derivative(*c, method_.detection);
    if (evaluation.endpoints.size() < static_cast<std::size_t>(method_.endpoint_count))
      return false;
    const auto& last = evaluation.endpoints.back();
    if (detection::has_flag(last.flags, detection::QualityFlag::few_points_after_endpoint)) {
      return false;
    }
    if (v >= last.volume_ml + method_.volume_past_endpoint_ml - 1e-9) {
      stop_reason_ = "stopped " + fixed(method_.volume_past_endpoint_ml, 2) +
                     " mL past the endpoint at " + fixed(last.volume_ml, 3) + " mL";
      return true;
    }
    return false;
  }

  // ---- records ------------------------------------------------------------

  void enter(RunState to, const std::string& reason) {
    const RunState from = state_;
    state_ = to;
    store::RunEvent e;
    e.time_s = inst_.clock.now_s();
    e.from_state = static_cast<int>(from);
    e.to_state = static_cast<int>(to);
    e.reason = reason;
    if (auto r = store_.record_event(outcome_.run_id, e); !r) {
      say("could not record the change to " + std::string(run_state_name(to)) + ": " +
          r.error().message);
    }
    if (observer_)
      observer_->on_state(from, to, reason);
  }

  void finish(RunState state, const std::string& reason) {
    enter(state, reason);
    outcome_.final_state = state;
    if (auto r = store_.finish_run(outcome_.run_id, outcome_.status, reason); !r) {
      outcome_.reason += "; " + r.error().describe();
    }
  }

  RunOutcome end_with_error(const Error& error) {
    // Stop dosing first, then record why.
    auto stopped = inst_.burette.stop();
    outcome_.burette_stopped = stopped.has_value();
    if (outcome_.titration_time_s == 0.0 && start_s_ > 0.0) {
      outcome_.titration_time_s = inst_.clock.now_s() - start_s_;
    }
    const bool aborted = error.kind == ErrorKind::aborted;
    outcome_.status = aborted ? store::RunStatus::aborted : store::RunStatus::failed;
    outcome_.reason = error.describe();
    if (!stopped) {
      // The driver may have tried a stop already (a fault during a motion)
      // and said so in the error: this is the second try.
      const bool tried = outcome_.reason.find("stop not confirmed") != std::string::npos;
      outcome_.reason +=
          (tried ? "; a second stop not confirmed either: " : "; stop command not confirmed: ") +
          stopped.error().message;
    }
    say("run ended: " + outcome_.reason);
    finish(aborted ? RunState::aborted : RunState::failed, outcome_.reason);
    return outcome_;
  }

  void say(const std::string& text) {
    if (observer_)
      observer_->on_message(text);
  }

  Instruments& inst_;
  // The outlier limit at which each point was taken (SettlingReadings), mV.
  std::vector<double> accepted_limits_mv_;
  store::RunStore& store_;
  const SampleDescription& sample_;
  const TitrationMethod& method_;
  RunObserver* observer_;
  RunControl* control_;
  std::unique_ptr<DosingStrategy> strategy_;
  RunOutcome outcome_;
  RunState state_ = RunState::starting;
  std::string stop_reason_;
  double volume_ml_ = 0.0;
  double start_s_ = 0.0;
  double strategy_endpoint_ml_ = 0.0;
  std::vector<double> volumes_, signals_, times_, temperatures_;
};

}  // namespace

const char* run_state_name(RunState state) {
  switch (state) {
    case RunState::starting:
      return "starting";
    case RunState::preparing:
      return "preparing";
    case RunState::filling:
      return "filling";
    case RunState::initial_addition:
      return "initial addition";
    case RunState::titrating:
      return "titrating";
    case RunState::evaluating:
      return "evaluating";
    case RunState::rinsing:
      return "rinsing";
    case RunState::paused:
      return "paused";
    case RunState::completed:
      return "completed";
    case RunState::failed:
      return "failed";
    case RunState::aborted:
      return "aborted";
  }
  return "unknown";
}

nlohmann::json to_json(const TitrationMethod& m) {
  nlohmann::json j = {
      {"name", m.name},
      {"dosing", to_json(m.dosing)},
      {"initial_volume_ml", m.initial_volume_ml},
      {"max_volume_ml", m.max_volume_ml},
      {"volume_past_endpoint_ml", m.volume_past_endpoint_ml},
      {"expected_endpoint_ml", m.expected_endpoint_ml},
      {"endpoint_count", m.endpoint_count},
      {"time_limit_s", m.time_limit_s},
      {"vessel_capacity_ml", m.vessel_capacity_ml},
      {"dose_rate_ml_per_min", m.dose_rate_ml_per_min},
      {"fill_rate_ml_per_min", m.fill_rate_ml_per_min},
      {"settling",
       {{"window_s", m.settling.window_s},
        {"drift_limit_per_min", m.settling.drift_limit_per_min},
        {"min_wait_s", m.settling.min_wait_s},
        {"max_wait_s", m.settling.max_wait_s},
        {"read_interval_s", m.settling.read_interval_s},
        {"slow_reaction_factor", m.settling.slow_reaction_factor},
        {"slow_change", m.settling.slow_change}}},
      {"detection", {{"method", "derivative"}, {"options", detection::to_json(m.detection)}}},
      {"endpoint_evaluation", {{"method", m.endpoint_method}, {"options", m.endpoint_options}}},
  };
  if (m.use_signal_limit)
    j["signal_limit"] = m.signal_limit;
  return j;
}

store::EvaluationRecord evaluation_record(const detection::Evaluation& evaluation) {
  store::EvaluationRecord record;
  record.method = evaluation.method;
  record.options_json = evaluation.options.dump();
  record.flags = flag_names(evaluation.flags);
  for (const auto& e : evaluation.endpoints) {
    record.endpoints.push_back(store::EndpointRecord{e.volume_ml, e.uncertainty_ml, e.signal,
                                                     e.steepness, flag_names(e.flags)});
  }
  return record;
}

Result<MetalResult> compute_metal_result(double endpoint_ml, const SampleDescription& s) {
  if (!(s.sample_volume_ml > 0.0) || !(s.titrant_conc_mol_per_l > 0.0) ||
      !std::isfinite(endpoint_ml) || endpoint_ml < 0.0) {
    return make_error(ErrorKind::invalid_input,
                      "a result needs a sample volume > 0 mL, a titrant "
                      "concentration > 0 mol/L "
                      "and a finite endpoint volume >= 0 mL");
  }
  MetalResult r;
  r.endpoint_ml = endpoint_ml;
  // mL * mol/L = mmol.
  r.amount_mmol = endpoint_ml * s.titrant_conc_mol_per_l * s.metal_per_titrant;
  r.conc_mmol_per_l = r.amount_mmol / s.sample_volume_ml * 1000.0;
  r.conc_mg_per_l = r.conc_mmol_per_l * s.metal_molar_mass_g_per_mol;
  return r;
}

double least_squares_slope_per_min(const std::vector<double>& t, const std::vector<double>& v) {
  const std::size_t n = t.size();
  if (n < 2 || v.size() != n)
    return 0.0;
  double mt = 0.0, mv = 0.0;
  for (std::size_t i = 0; i < n; ++i) {
    mt += t[i];
    mv += v[i];
  }
  mt /= static_cast<double>(n);
  mv /= static_cast<double>(n);
  double sxx = 0.0, sxy = 0.0;
  for (std::size_t i = 0; i < n; ++i) {
    sxx += (t[i] - mt) * (t[i] - mt);
    sxy += (t[i] - mt) * (v[i] - mv);
  }
  return sxx > 0.0 ? sxy / sxx * 60.0 : 0.0;
}

RunOutcome run_titration(Instruments& instruments, store::RunStore& store,
                         const SampleDescription& sample, const TitrationMethod& method,
                         RunObserver* observer, RunControl* control) {
  return Titration(instruments, store, sample, method, observer, control).run();
}

}  // namespace veq::controller
