#include "controller/titration.hpp"

#include <cmath>
#include <sstream>

#include "detection/curve.hpp"

namespace veq::controller {

namespace {

using drivers::from_seconds;

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

/// One titration in progress; the procedure reads top to bottom in run().
class Titration {
 public:
  Titration(Instruments& inst, store::RunStore& store, const SampleDescription& sample,
            const FixedIncrementMethod& method, RunObserver* observer,
            const std::atomic<bool>* abort)
      : inst_(inst),
        store_(store),
        sample_(sample),
        method_(method),
        observer_(observer),
        abort_(abort) {}

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

    if (auto done = titrate(); !done)
      return end_with_error(done.error());
    return evaluate_and_finish();
  }

 private:
  Result<void> titrate() {
    auto burette = inst_.burette.identify();
    if (!burette)
      return burette.error();
    auto sensor = inst_.sensor.identify();
    if (!sensor)
      return sensor.error();
    say("burette " + burette->model + ", " + fixed(burette->cylinder_ml, 1) +
        " mL cylinder; electrode " + sensor->electrode);
    if (method_.dose_rate_ml_per_min > burette->max_rate_ml_per_min ||
        method_.fill_rate_ml_per_min > burette->max_rate_ml_per_min) {
      return make_error(ErrorKind::invalid_input, "method rates exceed the burette's maximum of " +
                                                      fixed(burette->max_rate_ml_per_min, 2) +
                                                      " mL/min");
    }
    if (method_.increment_ml > burette->max_dose_ml) {
      return make_error(ErrorKind::invalid_input, "increment exceeds the burette's largest dose");
    }
    if (auto r = inst_.burette.arm_host_silence_stop(); !r)
      return r.error();
    if (auto r = refill_if_below(burette->cylinder_ml); !r)
      return r.error();
    if (auto r = inst_.burette.reset_counter(); !r)
      return r.error();

    // The starting point, before any titrant.
    if (auto r = settle_and_record(0.0, inst_.clock.now()); !r)
      return r.error();

    double volume_ml = 0.0;
    while (true) {
      if (auto r = check_abort(); !r)
        return r;
      if (volume_ml + method_.increment_ml > method_.max_volume_ml + 1e-9) {
        stop_reason_ = "maximum volume of " + fixed(method_.max_volume_ml, 2) + " mL reached";
        return {};
      }
      if (auto r = refill_if_below(method_.increment_ml); !r)
        return r.error();
      auto dosed = inst_.burette.dose(method_.increment_ml, method_.dose_rate_ml_per_min);
      if (!dosed)
        return dosed.error();
      volume_ml = dosed->delivered_ml;
      if (auto r = settle_and_record(volume_ml, inst_.clock.now()); !r)
        return r.error();
      if (past_endpoint(volume_ml))
        return {};
    }
  }

  Result<void> check_abort() {
    if (abort_ && abort_->load())
      return make_error(ErrorKind::aborted, "aborted by the operator");
    return {};
  }

  Result<void> refill_if_below(double needed_ml) {
    auto status = inst_.burette.status();
    if (!status)
      return status.error();
    if (status->cylinder_content_ml + 1e-9 >= needed_ml)
      return {};
    say("filling the cylinder (" + fixed(status->cylinder_content_ml, 3) + " mL left)");
    auto filled = inst_.burette.fill(method_.fill_rate_ml_per_min);
    if (!filled)
      return filled.error();
    return {};
  }

  /// Reads until the drift rule accepts a reading, then stores the point.
  Result<void> settle_and_record(double volume_ml, drivers::Duration dose_end) {
    const auto& rule = method_.settling;
    std::vector<double> times;
    std::vector<double> values;
    drivers::PotentialReading last{};
    double drift = 0.0;
    while (true) {
      if (auto r = check_abort(); !r)
        return r;
      auto reading = inst_.sensor.read();
      if (!reading)
        return reading.error();
      last = *reading;
      const double t = drivers::to_seconds(inst_.clock.now() - dose_end);
      times.push_back(t);
      values.push_back(reading->potential_mv);
      // Drift over the readings of the last window_s seconds.
      std::size_t first = 0;
      while (t - times[first] > rule.window_s + 1e-9)
        ++first;
      const std::vector<double> wt(times.begin() + static_cast<long>(first), times.end());
      const std::vector<double> wv(values.begin() + static_cast<long>(first), values.end());
      const bool enough = wt.size() >= 3 && wt.back() - wt.front() >= 2.0;
      drift = enough ? least_squares_slope_per_min(wt, wv) : 0.0;
      if (t >= rule.min_wait_s && enough && std::abs(drift) <= rule.drift_limit_per_min)
        break;
      if (t >= rule.max_wait_s) {
        say("reading at " + fixed(volume_ml, 3) + " mL taken after the longest wait, drift " +
            fixed(drift, 2) + " mV/min");
        break;
      }
      inst_.clock.sleep_for(from_seconds(rule.read_interval_s));
    }
    store::PointRecord point;
    point.index = static_cast<std::int64_t>(volumes_.size());
    point.time_s = inst_.clock.now_s();
    point.volume_ml = volume_ml;
    point.signal = last.potential_mv;
    point.temperature_c = last.temperature_c;
    point.drift_per_min = drift;
    point.settle_s = times.back();
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

  bool past_endpoint(double volume_ml) {
    if (volumes_.size() < 5)
      return false;
    auto c = curve();
    if (!c)
      return false;
    const auto evaluation = detection::find_endpoints_by_derivative(*c, method_.detection);
    if (evaluation.endpoints.empty())
      return false;
    const auto& last = evaluation.endpoints.back();
    if (detection::has_flag(last.flags, detection::QualityFlag::few_points_after_endpoint)) {
      return false;
    }
    if (volume_ml >= last.volume_ml + method_.volume_past_endpoint_ml - 1e-9) {
      stop_reason_ = "stopped " + fixed(method_.volume_past_endpoint_ml, 2) +
                     " mL past the endpoint at " + fixed(last.volume_ml, 3) + " mL";
      return true;
    }
    return false;
  }

  RunOutcome end_with_error(const Error& error) {
    // Stop dosing first, then record why.
    auto stopped = inst_.burette.stop();
    outcome_.burette_stopped = stopped.has_value();
    outcome_.status =
        error.kind == ErrorKind::aborted ? store::RunStatus::aborted : store::RunStatus::failed;
    outcome_.reason = error.describe();
    if (!stopped)
      outcome_.reason += "; stop command not confirmed: " + stopped.error().message;
    say("run ended: " + outcome_.reason);
    (void)store_.finish_run(outcome_.run_id, outcome_.status, outcome_.reason);
    return outcome_;
  }

  RunOutcome evaluate_and_finish() {
    auto c = curve();
    if (!c)
      return end_with_error(c.error());
    const auto evaluation = detection::find_endpoints_by_derivative(*c, method_.detection);
    store::EvaluationRecord record;
    record.method = evaluation.method;
    record.options_json = evaluation.options.dump();
    record.flags = flag_names(evaluation.flags);
    for (const auto& e : evaluation.endpoints) {
      record.endpoints.push_back(store::EndpointRecord{e.volume_ml, e.uncertainty_ml, e.signal,
                                                       e.steepness, flag_names(e.flags)});
    }
    auto evaluation_id = store_.add_evaluation(outcome_.run_id, record);
    if (!evaluation_id)
      return end_with_error(evaluation_id.error());
    if (evaluation.endpoints.empty()) {
      outcome_.status = store::RunStatus::failed;
      outcome_.reason = "no endpoint found (" + stop_reason_ + ")";
      (void)store_.finish_run(outcome_.run_id, outcome_.status, outcome_.reason);
      return outcome_;
    }
    // The endpoint of a single-metal titration is the largest break.
    const detection::Endpoint* best = &evaluation.endpoints.front();
    for (const auto& e : evaluation.endpoints) {
      if (e.steepness > best->steepness)
        best = &e;
    }
    outcome_.endpoint = *best;
    auto result = compute_metal_result(best->volume_ml, sample_);
    if (!result)
      return end_with_error(result.error());
    outcome_.result = *result;
    const std::pair<const char*, std::pair<double, const char*>> rows[] = {
        {"endpoint_volume", {result->endpoint_ml, "mL"}},
        {"metal_amount", {result->amount_mmol, "mmol"}},
        {"metal_concentration", {result->conc_mmol_per_l, "mmol/L"}},
        {"metal_mass_concentration", {result->conc_mg_per_l, "mg/L"}},
    };
    for (const auto& [name, value] : rows) {
      store::ResultRecord r;
      r.run_id = outcome_.run_id;
      r.evaluation_id = *evaluation_id;
      r.name = name;
      r.value = value.first;
      r.unit = value.second;
      if (auto stored = store_.add_result(r); !stored)
        return end_with_error(stored.error());
    }
    outcome_.status = store::RunStatus::completed;
    outcome_.reason = stop_reason_;
    if (auto r = store_.finish_run(outcome_.run_id, outcome_.status, outcome_.reason); !r) {
      outcome_.reason += "; " + r.error().describe();
    }
    return outcome_;
  }

  void say(const std::string& text) {
    if (observer_)
      observer_->on_message(text);
  }

  Instruments& inst_;
  store::RunStore& store_;
  const SampleDescription& sample_;
  const FixedIncrementMethod& method_;
  RunObserver* observer_;
  const std::atomic<bool>* abort_;
  RunOutcome outcome_;
  std::string stop_reason_;
  std::vector<double> volumes_, signals_, times_, temperatures_;
};

}  // namespace

nlohmann::json to_json(const FixedIncrementMethod& m) {
  return {
      {"name", m.name},
      {"dosing", "fixed increments"},
      {"increment_ml", m.increment_ml},
      {"max_volume_ml", m.max_volume_ml},
      {"volume_past_endpoint_ml", m.volume_past_endpoint_ml},
      {"dose_rate_ml_per_min", m.dose_rate_ml_per_min},
      {"fill_rate_ml_per_min", m.fill_rate_ml_per_min},
      {"settling",
       {{"window_s", m.settling.window_s},
        {"drift_limit_per_min", m.settling.drift_limit_per_min},
        {"min_wait_s", m.settling.min_wait_s},
        {"max_wait_s", m.settling.max_wait_s},
        {"read_interval_s", m.settling.read_interval_s}}},
      {"detection", {{"method", "derivative"}, {"options", detection::to_json(m.detection)}}},
  };
}

Result<MetalResult> compute_metal_result(double endpoint_ml, const SampleDescription& s) {
  if (!(s.sample_volume_ml > 0.0) || !(s.titrant_conc_mol_per_l > 0.0) ||
      !std::isfinite(endpoint_ml) || endpoint_ml < 0.0) {
    return make_error(ErrorKind::invalid_input,
                      "a result needs a sample volume > 0 mL, a titrant concentration > 0 mol/L "
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

RunOutcome run_fixed_increment_titration(Instruments& instruments, store::RunStore& store,
                                         const SampleDescription& sample,
                                         const FixedIncrementMethod& method, RunObserver* observer,
                                         const std::atomic<bool>* abort) {
  return Titration(instruments, store, sample, method, observer, abort).run();
}

}  // namespace veq::controller
