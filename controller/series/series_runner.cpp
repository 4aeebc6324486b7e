#include "controller/series/series_runner.hpp"

#include <algorithm>
#include <cmath>
#include <numeric>
#include <sstream>

#include <nlohmann/json.hpp>

#include "common/version.hpp"
#include "controller/method/readiness.hpp"
#include "controller/method/stored_methods.hpp"
#include "controller/results.hpp"

namespace veq::series {

namespace {

using nlohmann::json;

/// How far a failure reaches.
enum class Reach {
  determination,  ///< this vessel only: repeat once on a spare, then flag
  sample,         ///< this sample only (pH not reached...): flag and go on
  series,         ///< later results would be untrustworthy: stop the series
};

struct Failure {
  Reach reach = Reach::series;
  std::string reason;
};

std::string fixed(double v, int digits) {
  std::ostringstream out;
  out.setf(std::ios::fixed);
  out.precision(digits);
  out << v;
  return out.str();
}

Failure device_failure(const std::string& what, const Error& e) {
  return Failure{Reach::series, what + ": " + e.describe()};
}

/// One titration stage of a determination (a titrate step, or an add
/// titrant step with its back titrate step).
struct StageMeasured {
  std::int64_t run_id = 0;
  std::int64_t evaluation_id = 0;  ///< the run's evaluation its endpoints come from
  std::string titrated_with;
  double endpoint_ml = 0.0;  ///< burette reading from the stage's own start, mL
  double endpoint_uncertainty_ml = 0.0;
  /// Every endpoint of the stage's curve in volume order, when it passes
  /// more than one (TitrateStep::endpoints); else the one above.
  struct Break {
    double volume_ml = 0.0;
    double uncertainty_ml = 0.0;
  };
  std::vector<Break> endpoints;
  double dosed_ml = 0.0;  ///< the stage's last recorded burette reading: all it dosed, mL
  bool back_titration = false;
  double excess_ml = 0.0;  ///< titrant added as an excess before the back-titration, mL
  std::string excess_titrant;
};

/// What one determination measured: its stages in the order they ran.
struct Measured {
  int position = 0;
  std::vector<StageMeasured> stages;
  /// An excess added and not yet titrated back (it belongs to the next stage).
  double excess_ml = 0.0;
  std::string excess_titrant;
  std::int64_t run_id(std::size_t stage) const {
    return stage < stages.size() ? stages[stage].run_id : 0;
  }
};

/// The titrant a result rule counts in one determination.
struct RuleVolume {
  int stage = 0;  ///< 1-based
  std::string titrant;
  double volume_ml = 0.0;  ///< of `titrant`, mL
  double uncertainty_ml = 0.0;
  json detail;
};

/// One value of a determination with its inputs.
struct Value {
  double value = 0.0;
  json detail;
  int stage = 0;
  double volume_ml = 0.0;
  double uncertainty_ml = 0.0;
  std::string titrant;
};

/// The values a result collects over an entry's determinations.
struct ResultValues {
  std::vector<double> values;
  std::vector<double> endpoint_volumes;
  std::vector<double> endpoint_uncertainties;
  std::string titrant;
};

/// The key of a blank volume: one per method and result.
std::string blank_key(const method::Method& m, const std::string& analyte) {
  return m.name + "\n" + analyte;
}

class SeriesRun {
 public:
  SeriesRun(const Series& series, const std::string& text, SeriesInstruments& inst,
            SeriesStores& stores, const SeriesOptions& options, SeriesObserver* observer,
            const std::atomic<bool>* abort)
      : series_(series),
        text_(text),
        inst_(inst),
        stores_(stores),
        options_(options),
        observer_(observer),
        abort_(abort) {
    start_time_ = options.start_time.value_or(
        std::chrono::time_point_cast<std::chrono::milliseconds>(std::chrono::system_clock::now()));
    clock_start_s_ = inst.clock.now_s();
  }

  SeriesOutcome run() {
    auto id = stores_.series.begin_series(series_.name, text_);
    if (!id) {
      outcome_.reason = id.error().describe();
      return outcome_;
    }
    outcome_.series_id = *id;
    std::optional<Failure> stop;
    int samples_since_check = 0;
    const Entry* repeating_check = nullptr;
    std::size_t check_uses = 0;
    for (const auto& entry : series_.entries)
      if (entry.kind == EntryKind::check_standard && series_.check_standard_every > 0)
        repeating_check = &entry;
    for (const auto& entry : series_.entries) {
      if (&entry == repeating_check)
        continue;  // runs every N samples and at the end
      if (aborted()) {
        stop = Failure{Reach::series, "aborted by the operator"};
        break;
      }
      stop = run_entry(entry, std::nullopt);
      if (stop)
        break;
      if (entry.kind == EntryKind::sample && repeating_check &&
          ++samples_since_check == series_.check_standard_every) {
        samples_since_check = 0;
        stop = run_entry(*repeating_check, check_uses++);
        if (stop)
          break;
      }
    }
    if (!stop && repeating_check && samples_since_check > 0)
      stop = run_entry(*repeating_check, check_uses++);
    stop_burettes();
    store::SeriesStatus status = store::SeriesStatus::completed;
    std::string reason;
    if (stop) {
      status = aborted() ? store::SeriesStatus::aborted : store::SeriesStatus::stopped;
      reason = stop->reason;
    } else {
      int flagged = 0;
      for (const auto& e : outcome_.entries)
        flagged += e.status != "done";
      reason = std::to_string(outcome_.entries.size()) + " entries run, " +
               std::to_string(flagged) + " flagged or failed";
    }
    if (auto r = stores_.series.finish_series(outcome_.series_id, status, reason); !r)
      reason += "; the series' end could not be stored: " + r.error().describe();
    outcome_.status = status;
    outcome_.reason = reason;
    say("series " + std::string(store::series_status_name(status)) + ": " + reason);
    return outcome_;
  }

 private:
  // ---- the entries -------------------------------------------------------

  /// Runs one entry; a failure that stops the series is returned. `use`: for
  /// a repeating check standard, which occurrence (it takes one position).
  std::optional<Failure> run_entry(const Entry& entry, std::optional<std::size_t> use) {
    EntryOutcome eo;
    eo.kind = entry.kind;
    eo.label = entry.id + (use ? " #" + std::to_string(*use + 1) : "");
    if (observer_)
      observer_->on_entry(entry_kind_name(entry.kind), eo.label);
    say(std::string(entry_kind_name(entry.kind)) + " '" + eo.label + "'");

    std::optional<method::Method> m;
    if (!entry.method.empty()) {
      auto loaded = method::load_method(stores_.methods, entry.method, entry.method_version);
      if (!loaded)
        return end_entry_early(
            eo, entry, "cannot use method '" + entry.method + "': " + loaded.error().describe());
      m = *loaded;
    }
    store::SeriesEntryRecord record;
    record.series_id = outcome_.series_id;
    record.index = static_cast<int>(outcome_.entries.size());
    record.kind = entry_kind_name(entry.kind);
    record.label = eo.label;
    if (m) {
      record.method_name = m->name;
      record.method_version = m->version;
    }
    auto entry_id = stores_.series.begin_entry(record);
    if (!entry_id)
      return Failure{Reach::series,
                     "cannot store entry '" + eo.label + "': " + entry_id.error().describe()};
    eo.entry_id = *entry_id;
    entry_ = &eo;
    notes_.clear();
    flags_.clear();

    std::optional<Failure> stop;
    switch (entry.kind) {
      case EntryKind::calibration:
        stop = run_calibration(entry);
        break;
      case EntryKind::burette_check:
        stop = run_burette_check(entry);
        break;
      default:
        stop = run_titrations(entry, *m, use);
        break;
    }
    if (stop)
      notes_.push_back(stop->reason);
    if (eo.status.empty())
      eo.status = stop ? "failed" : (flagged_ ? "flagged" : "done");
    std::string note;
    for (const auto& n : notes_)
      note += (note.empty() ? "" : "\n") + n;
    eo.note = note;
    if (auto r = stores_.series.finish_entry(eo.entry_id, eo.status, note); !r && !stop)
      stop = Failure{Reach::series,
                     "cannot store the end of entry '" + eo.label + "': " + r.error().describe()};
    if (observer_)
      observer_->on_entry_end(eo.label, eo.status, note);
    outcome_.entries.push_back(eo);
    entry_ = nullptr;
    flagged_ = false;
    return stop;
  }

  std::optional<Failure> end_entry_early(EntryOutcome& eo, const Entry& entry,
                                         const std::string& reason) {
    store::SeriesEntryRecord record;
    record.series_id = outcome_.series_id;
    record.index = static_cast<int>(outcome_.entries.size());
    record.kind = entry_kind_name(entry.kind);
    record.label = eo.label;
    record.method_name = entry.method;
    if (auto id = stores_.series.begin_entry(record); id) {
      eo.entry_id = *id;
      (void)stores_.series.finish_entry(*id, "failed", reason);
    }
    eo.status = "failed";
    eo.note = reason;
    outcome_.entries.push_back(eo);
    return Failure{Reach::series, reason};
  }

  /// The result rules an entry computes: every one for samples and blanks
  /// (each result subtracts its own blank); the first for entries that give
  /// one value (titer, check standard, conditioning).
  static std::vector<method::ResultRule> rules_of(const Entry& entry, const method::Method& m) {
    if (entry.kind == EntryKind::sample || entry.kind == EntryKind::blank)
      return method::result_rules(m);
    return {m.result};
  }

  /// Sample, check standard, blank, titer and conditioning entries.
  std::optional<Failure> run_titrations(const Entry& entry, const method::Method& m,
                                        std::optional<std::size_t> use) {
    // Titers and calibrations must hold for results; a titer determination
    // and a blank measure what later results need and use nominal values.
    std::optional<method::Readiness> ready;
    const bool needs_ready =
        entry.kind == EntryKind::sample || entry.kind == EntryKind::check_standard;
    if (needs_ready) {
      auto r = method::check_ready(m, stores_.methods, now());
      if (!r)
        return Failure{Reach::series, "method '" + m.name + "' is not ready: " + r.error().message};
      ready = *r;
    } else if (m.indication.needs_calibration && entry.kind != EntryKind::conditioning) {
      auto history = stores_.methods.calibration_history(m.indication.name);
      if (!history)
        return Failure{Reach::series, history.error().describe()};
      const auto cal = method::latest_accepted_calibration(*history, m.indication.name, now());
      if (!cal || !method::calibration_valid_at(*cal, now()))
        return Failure{Reach::series, "no valid calibration of '" + m.indication.name + "'"};
    }
    if (entry.kind == EntryKind::check_standard && entry.expected_unit != m.result.unit)
      return Failure{Reach::series, "check standard '" + entry.id + "' expects a value in " +
                                        entry.expected_unit + " but method '" + m.name +
                                        "' gives " + m.result.unit};
    const std::vector<method::ResultRule> rules = rules_of(entry, m);

    // Positions: a repeating check standard takes one per occurrence.
    std::vector<int> positions = entry.positions;
    int replicates = entry.replicates > 0 ? entry.replicates : m.replicates;
    if (entry.kind == EntryKind::conditioning)
      replicates = 1;
    if (entry.kind == EntryKind::titer)
      replicates = static_cast<int>(entry.positions.size());
    replicates_ = replicates;
    if (use) {
      const std::size_t first = *use * static_cast<std::size_t>(replicates);
      if (first + static_cast<std::size_t>(replicates) > positions.size())
        return Failure{Reach::series, "check standard '" + entry.id +
                                          "' has no positions left for its occurrence " +
                                          std::to_string(*use + 1)};
      positions = std::vector<int>(positions.begin() + static_cast<long>(first),
                                   positions.begin() + static_cast<long>(first) + replicates);
    }
    std::size_t next_position = 0;
    auto portion_for = [&](std::size_t i) {
      if (entry.portions.empty())
        return Portion{};
      return entry.portions.size() == 1 ? entry.portions.front()
                                        : entry.portions[std::min(i, entry.portions.size() - 1)];
    };

    std::vector<ResultValues> collected(rules.size());
    int replicate_no = 0;
    int planned = replicates;
    bool extra_asked = false;
    int repeats_left_for_slot = 0;
    for (int slot = 0; slot < planned; ++slot) {
      repeats_left_for_slot = 1;
      while (true) {
        if (aborted())
          return Failure{Reach::series, "aborted by the operator"};
        if (next_position >= positions.size()) {
          flag("replicate " + std::to_string(slot + 1) + ": no spare position left");
          break;
        }
        const std::size_t portion_index = next_position;
        const int position = positions[next_position++];
        ++replicate_no;
        Measured got;
        got.position = position;
        const Portion portion = portion_for(portion_index);
        std::optional<Failure> failure;
        if (portion.from_balance && !(portion.mass_g > 0.0))
          failure = Failure{Reach::determination,
                            "no mass for this portion: it was not weighed, or the balance did "
                            "not settle when it was"};
        else
          failure = measure(entry, m, position, portion, got, ready);
        store::DeterminationRecord d;
        d.entry_id = entry_->entry_id;
        d.replicate = replicate_no;
        d.position = position;
        d.run_id = got.run_id(0);
        d.second_run_id = got.run_id(1);
        if (failure && failure->reach == Reach::series) {
          d.counted = false;
          d.flags = "failed";
          d.detail_json = json{{"reason", failure->reason}}.dump();
          (void)store_determination(d);
          return failure;
        }
        std::vector<Value> value;
        if (!failure) {
          auto v = compute_values(entry, m, rules, got, portion_for(portion_index), ready);
          if (!v)
            failure = Failure{Reach::sample, v.error().message};
          else
            value = std::move(*v);
        }
        if (failure) {
          d.counted = false;
          d.flags = failure->reach == Reach::determination && repeats_left_for_slot > 0 ? "repeated"
                                                                                        : "failed";
          d.detail_json = json{{"reason", failure->reason}}.dump();
          if (auto f = store_determination(d))
            return f;
          notes_.push_back("replicate " + std::to_string(slot + 1) + ", vessel at position " +
                           std::to_string(position) + ": " + failure->reason);
          if (failure->reach == Reach::determination && repeats_left_for_slot-- > 0)
            continue;  // repeated once on the next spare position
          flag("replicate " + std::to_string(slot + 1) + " gave no value");
          break;
        }
        // One determination per result: a method titrating in stages stores
        // each of its results with the run of the stage it comes from.
        for (std::size_t k = 0; k < rules.size(); ++k) {
          store::DeterminationRecord dk = d;
          if (rules.size() > 1) {
            const auto stage = static_cast<std::size_t>(value[k].stage - 1);
            dk.run_id = got.run_id(stage);
            dk.second_run_id = got.run_id(stage > 0 ? stage - 1 : 1);
          }
          dk.value = value[k].value;
          dk.unit = unit_of(entry, rules[k]);
          dk.detail_json = value[k].detail.dump();
          if (auto f = store_determination(dk))
            return f;
          collected[k].values.push_back(value[k].value);
          collected[k].endpoint_volumes.push_back(value[k].volume_ml);
          collected[k].endpoint_uncertainties.push_back(value[k].uncertainty_ml);
          collected[k].titrant = value[k].titrant;
        }
        break;
      }
      // Duplicates that disagree get one extra replicate (once, whichever
      // result disagrees).
      if (slot + 1 == planned && !extra_asked && entry.kind == EntryKind::sample) {
        for (std::size_t k = 0; k < rules.size() && !extra_asked; ++k) {
          const auto& rule = rules[k];
          const auto& values = collected[k].values;
          if (values.size() < 2 || !rule.largest_replicate_difference)
            continue;
          const auto [lo, hi] = std::minmax_element(values.begin(), values.end());
          const double mean = std::accumulate(values.begin(), values.end(), 0.0) /
                              static_cast<double>(values.size());
          const double spread =
              rule.replicate_difference_relative ? (*hi - *lo) / mean * 100.0 : (*hi - *lo);
          if (spread > *rule.largest_replicate_difference) {
            extra_asked = true;
            ++planned;
            notes_.push_back(
                result_prefix(rules, rule) + "replicates differ by " + fixed(spread, 3) +
                (rule.replicate_difference_relative ? " %" : " " + rule.unit) +
                ", above the method's " + fixed(*rule.largest_replicate_difference, 3) +
                ": one extra replicate");
          }
        }
      }
    }
    // Flags raised so far (a replicate without a value, no spare left) hold
    // for every result of the entry.
    const std::vector<std::string> common_flags = flags_;
    std::optional<Failure> stop;
    for (std::size_t k = 0; k < rules.size(); ++k) {
      flags_ = common_flags;
      const std::string unit = unit_of(entry, rules[k]);
      EntryOutcome::Named named;
      named.name = result_name(entry, rules, rules[k]);
      named.values = collected[k].values;
      named.unit = unit;
      if (k == 0) {
        entry_->values = collected[k].values;
        entry_->unit = unit;
      }
      auto f = conclude(entry, m, rules, rules[k], collected[k], ready, named);
      if (entry.kind != EntryKind::conditioning)
        entry_->results.push_back(named);
      if (f && !stop)
        stop = f;
    }
    return stop;
  }

  /// "zinc: " before what is said of one result of several; nothing for a
  /// method's only result.
  static std::string result_prefix(const std::vector<method::ResultRule>& rules,
                                   const method::ResultRule& rule) {
    return rules.size() > 1 ? rule.analyte + ": " : "";
  }

  /// The name of an entry's result as stored (entry_results.name).
  static std::string result_name(const Entry& entry, const std::vector<method::ResultRule>& rules,
                                 const method::ResultRule& rule) {
    switch (entry.kind) {
      case EntryKind::blank:
        return rules.size() > 1 ? "blank volume: " + rule.analyte : "blank volume";
      case EntryKind::titer:
        return "titer concentration";
      case EntryKind::check_standard:
        return "check standard";
      default:
        return rule.analyte;
    }
  }

  /// The entry's result from its counted values: statistics, limits, and
  /// what the later entries use (blank, titer); a failure that stops the
  /// series (refused titer, failed check standard).
  std::optional<Failure> conclude(const Entry& entry, const method::Method& m,
                                  const std::vector<method::ResultRule>& rules,
                                  const method::ResultRule& rule, const ResultValues& got,
                                  const std::optional<method::Readiness>& ready,
                                  EntryOutcome::Named& named) {
    const std::vector<double>& values = got.values;
    if (entry.kind == EntryKind::conditioning)
      return std::nullopt;
    const std::string prefix = result_prefix(rules, rule);
    if (values.empty()) {
      entry_->status = "failed";
      if (entry.kind == EntryKind::titer || entry.kind == EntryKind::check_standard ||
          entry.kind == EntryKind::blank)
        return Failure{Reach::series, std::string(entry_kind_name(entry.kind)) + " '" + entry.id +
                                          "' gave no value"};
      return std::nullopt;
    }
    const double mean =
        std::accumulate(values.begin(), values.end(), 0.0) / static_cast<double>(values.size());
    named.mean = mean;
    if (&rule == &rules.front())
      entry_->mean = mean;
    store::EntryResultRecord r;
    r.entry_id = entry_->entry_id;
    r.name = result_name(entry, rules, rule);
    r.value = mean;
    r.unit = unit_of(entry, rule);
    r.count = static_cast<int>(values.size());
    json detail;
    detail["values"] = values;
    if (!m.more_results.empty()) {
      detail["stage"] = rule.stage;
      detail["counted_from"] = method::counted_from_name(rule.counted_from);
      if (!rule.less.empty())
        detail["less"] = rule.less;
    }
    if (auto stats = controller::replicate_statistics(values); stats) {
      r.sd = stats->sd;
      r.rsd_percent = stats->rsd_percent;
      if (stats->outlier) {
        detail["outlier_test"] = {{"name", stats->outlier->name},
                                  {"statistic", stats->outlier->statistic},
                                  {"critical_5_percent", stats->outlier->critical_5_percent},
                                  {"critical_1_percent", stats->outlier->critical_1_percent},
                                  {"verdict", stats->outlier->verdict}};
        if (stats->outlier->verdict != "none")
          flag(prefix + "replicate " + std::to_string(stats->outlier->suspect_index + 1) +
               " is a " + stats->outlier->verdict + " by the " + stats->outlier->name);
      }
    }
    std::optional<Failure> stop;
    switch (entry.kind) {
      case EntryKind::blank:
        blank_ml_[blank_key(m, rule.analyte)] = mean;
        break;
      case EntryKind::titer: {
        auto stored =
            method::record_titer(stores_.methods, entry.titrant, values, now(), options_.titer);
        if (!stored) {
          stop = Failure{Reach::series, "cannot store the titer of '" + entry.titrant +
                                            "': " + stored.error().describe()};
        } else {
          detail["titer_id"] = stored->id;
          detail["accepted"] = stored->accepted;
          detail["expires_utc"] = stored->expires_utc;
          if (!stored->accepted) {
            flag("titer refused: " + stored->note);
            stop = Failure{Reach::series, "the titer of '" + entry.titrant + "' was refused (" +
                                              stored->note + ")"};
          }
        }
        break;
      }
      case EntryKind::check_standard: {
        const double deviation = (mean - entry.expected_value) / entry.expected_value * 100.0;
        detail["expected"] = entry.expected_value;
        detail["deviation_percent"] = deviation;
        detail["tolerance_percent"] = entry.tolerance_percent;
        if (std::abs(deviation) > entry.tolerance_percent) {
          flag("check standard off by " + fixed(deviation, 2) + " % (tolerance " +
               fixed(entry.tolerance_percent, 2) + " %)");
          stop = Failure{Reach::series, "check standard '" + entry.id +
                                            "' failed: " + fixed(mean, 4) + " " + r.unit +
                                            " against " + fixed(entry.expected_value, 4) +
                                            " expected (" + fixed(deviation, 2) + " %, tolerance " +
                                            fixed(entry.tolerance_percent, 2) + " %)"};
        }
        break;
      }
      default: {
        if (rule.lowest && mean < *rule.lowest)
          flag(prefix + "below the method's lowest " + fixed(*rule.lowest, 4) + " " + r.unit);
        if (rule.highest && mean > *rule.highest)
          flag(prefix + "above the method's highest " + fixed(*rule.highest, 4) + " " + r.unit);
        if (values.size() >= 2 && rule.largest_replicate_difference) {
          const auto [lo, hi] = std::minmax_element(values.begin(), values.end());
          const double spread =
              rule.replicate_difference_relative ? (*hi - *lo) / mean * 100.0 : (*hi - *lo);
          if (spread > *rule.largest_replicate_difference)
            flag(prefix + "replicates still differ by " + fixed(spread, 3) +
                 (rule.replicate_difference_relative ? " %" : " " + r.unit));
        }
        if (values.size() < static_cast<std::size_t>(std::max(1, replicates_)))
          flag(prefix + std::to_string(values.size()) + " of " + std::to_string(replicates_) +
               " replicates gave a value");
        if (auto budget = uncertainty(entry, mean, got, ready); budget) {
          json rows = json::array();
          for (const auto& c : budget->components)
            rows.push_back({{"name", c.name},
                            {"value", c.value},
                            {"standard_uncertainty", c.standard_uncertainty},
                            {"relative_uncertainty", c.relative_uncertainty},
                            {"share_percent", c.share_percent},
                            {"basis", c.basis}});
          detail["uncertainty"] = {{"components", rows},
                                   {"combined_standard", budget->combined_standard},
                                   {"coverage_factor", budget->coverage_factor},
                                   {"expanded", budget->expanded}};
        }
        break;
      }
    }
    r.flags = flags_text();
    named.flags = r.flags;
    r.detail_json = detail.dump();
    if (auto stored = stores_.series.add_entry_result(r); !stored && !stop)
      stop = Failure{Reach::series, stored.error().describe()};
    return stop;
  }

  /// GUM budget of a sample's mean: burette volume, endpoint, titer,
  /// repeatability, sample size (relative uncertainties in quadrature).
  Result<controller::UncertaintyBudget> uncertainty(const Entry& entry, double mean,
                                                    const ResultValues& got,
                                                    const std::optional<method::Readiness>& ready) {
    const std::vector<double>& values = got.values;
    const std::vector<double>& endpoint_volumes = got.endpoint_volumes;
    const std::vector<double>& endpoint_uncertainties = got.endpoint_uncertainties;
    std::vector<controller::UncertaintyComponent> c;
    // The typical titrant volume of this entry: the mean of its endpoints.
    const double volume =
        endpoint_volumes.empty()
            ? 1.0
            : std::accumulate(endpoint_volumes.begin(), endpoint_volumes.end(), 0.0) /
                  static_cast<double>(endpoint_volumes.size());
    c.push_back({"titrant volume (burette tolerance)", volume,
                 volume * options_.burette_relative_uncertainty,
                 "ISO 8655-3 systematic limit, rectangular: a/√3"});
    double u_ep = 0.0;
    for (double u : endpoint_uncertainties)
      u_ep = std::max(u_ep, u);
    if (u_ep > 0.0)
      c.push_back(
          {"endpoint (detection)", volume, u_ep, "standard uncertainty from the endpoint method"});
    const method::Readiness::Titer* titer = nullptr;
    if (ready)
      for (const auto& t : ready->titers)
        if (!titer || t.titrant == got.titrant)
          titer = &t;
    if (titer) {
      const auto& t = *titer;
      auto history = stores_.methods.titer_history(t.titrant);
      double rsd = 0.0;
      int n = 1;
      if (history)
        for (const auto& h : *history)
          if (h.id == t.titer_id) {
            rsd = h.rsd_percent;
            n = std::max<int>(1, static_cast<int>(h.determinations_mol_per_l.size()));
          }
      if (rsd > 0.0)
        c.push_back({"titer", t.conc_mol_per_l,
                     t.conc_mol_per_l * rsd / 100.0 / std::sqrt(static_cast<double>(n)),
                     "standard deviation of the mean of " + std::to_string(n) + " determinations"});
    }
    if (values.size() >= 2) {
      auto stats = controller::replicate_statistics(values);
      if (stats && stats->rsd_percent > 0.0)
        c.push_back({"repeatability", 1.0,
                     stats->rsd_percent / 100.0 / std::sqrt(static_cast<double>(values.size())),
                     "relative standard deviation of the mean of " + std::to_string(values.size()) +
                         " replicates"});
    }
    const Portion p = entry.portions.empty() ? Portion{} : entry.portions.front();
    if (p.mass_g > 0.0)
      c.push_back({"sample mass", p.mass_g, 0.0001 / std::sqrt(3.0) * std::sqrt(2.0),
                   "balance readability 0.1 mg assumed (an analytical balance), two readings, "
                   "rectangular"});
    else if (p.aliquot_ml > 0.0)
      c.push_back({"aliquot volume", p.aliquot_ml, p.aliquot_ml * 0.0008 / std::sqrt(6.0),
                   "class A pipette tolerance ±0.08 % (recalled from memory), triangular (common "
                   "practice)"});
    return controller::product_quotient_budget(mean, c);
  }

  // ---- one determination -------------------------------------------------

  /// Brings the vessel, runs the method's steps, takes it away.
  std::optional<Failure> measure(const Entry& entry, const method::Method& m, int position,
                                 const Portion& portion, Measured& got,
                                 const std::optional<method::Readiness>& ready) {
    if (auto f = bring_vessel(position))
      return f;
    auto failure = run_steps(entry, m, portion, got, ready);
    if (auto f = take_vessel_away(); f && (!failure || failure->reach != Reach::series))
      return f;
    return failure;
  }

  std::optional<Failure> bring_vessel(int position) {
    if (!inst_.changer)
      return std::nullopt;
    // The head may have been left down (a series stopped mid-vessel, an
    // operator's manual move): the changer carries it only when raised.
    auto status = inst_.changer->status();
    if (!status)
      return device_failure("sample changer, reading its status", status.error());
    if (status->head != drivers::HeadPosition::up)
      if (auto r = inst_.changer->raise(); !r)
        return device_failure("sample changer, raising the head", r.error());
    if (auto r = inst_.changer->move_to(position); !r)
      return device_failure("sample changer, moving to position " + std::to_string(position),
                            r.error());
    if (auto r = inst_.changer->lower(); !r)
      return device_failure("sample changer, lowering at position " + std::to_string(position),
                            r.error());
    if (inst_.stirrer)
      if (auto r = inst_.stirrer->set_speed(options_.stirrer_rpm); !r)
        return device_failure("stirrer", r.error());
    return std::nullopt;
  }

  std::optional<Failure> take_vessel_away() {
    if (inst_.stirrer)
      (void)inst_.stirrer->stop();
    if (!inst_.changer)
      return std::nullopt;
    if (auto r = inst_.changer->raise(); !r)
      return device_failure("sample changer, raising the head", r.error());
    if (options_.rinse_s > 0.0)
      if (auto r = inst_.changer->rinse(options_.rinse_s); !r)
        return device_failure("sample changer, rinsing", r.error());
    return std::nullopt;
  }

  std::optional<Failure> run_steps(const Entry& entry, const method::Method& m,
                                   const Portion& portion, Measured& got,
                                   const std::optional<method::Readiness>& ready) {
    std::optional<controller::RunOutcome> last_run;
    for (std::size_t i = 0; i < m.steps.size(); ++i) {
      if (aborted())
        return Failure{Reach::series, "aborted by the operator"};
      const auto& step = m.steps[i];
      std::optional<Failure> f;
      if (const auto* s = std::get_if<method::AddReagentStep>(&step)) {
        f = add_reagent(m, *s);
      } else if (const auto* s = std::get_if<method::AdjustPhStep>(&step)) {
        f = adjust_ph(m, *s);
      } else if (const auto* s = std::get_if<method::WaitStep>(&step)) {
        if (inst_.stirrer)
          if (auto r = inst_.stirrer->set_speed(s->stirrer_rpm); !r)
            return device_failure("stirrer", r.error());
        inst_.clock.sleep_for(drivers::from_seconds(s->duration_s));
        if (inst_.stirrer && s->stirrer_rpm != options_.stirrer_rpm)
          if (auto r = inst_.stirrer->set_speed(options_.stirrer_rpm); !r)
            return device_failure("stirrer", r.error());
      } else if (const auto* s = std::get_if<method::AddTitrantStep>(&step)) {
        f = add_titrant(m, *s);
        got.excess_ml = s->volume_ml;
        got.excess_titrant = s->titrant;
      } else if (const auto* s = std::get_if<method::TitrateStep>(&step)) {
        f = titrate(entry, m, *s, false, i, portion, got, ready, last_run);
      } else if (const auto* s = std::get_if<method::BackTitrateStep>(&step)) {
        f = titrate(entry, m, *s, true, i, portion, got, ready, last_run);
      } else if (const auto* s = std::get_if<method::EvaluateStep>(&step)) {
        // The titration before it evaluated with this step's method; here
        // the endpoint is held against the expected range.
        if (!last_run || !last_run->endpoint)
          return Failure{Reach::determination, "no endpoint to evaluate"};
        const double v = last_run->endpoint->volume_ml;
        const bool range_set = s->expected_to_ml > s->expected_from_ml;
        if (range_set && (v < s->expected_from_ml || v > s->expected_to_ml) &&
            entry.kind != EntryKind::blank)
          return Failure{Reach::determination, "endpoint " + fixed(v, 4) +
                                                   " mL outside the expected " +
                                                   fixed(s->expected_from_ml, 3) + " to " +
                                                   fixed(s->expected_to_ml, 3) + " mL"};
      } else if (std::get_if<method::RinseStep>(&step)) {
        // Rinsing is done by the sample changer when the vessel leaves.
      }
      if (f)
        return f;
    }
    if (!last_run || !last_run->endpoint)
      return Failure{Reach::determination, "the method measured no endpoint"};
    return std::nullopt;
  }

  const method::TitrantUse* titrant_use(const method::Method& m, const std::string& name) {
    for (const auto& t : m.titrants)
      if (t.name == name)
        return &t;
    return nullptr;
  }

  drivers::BuretteClient* burette_for(const method::Method& m, const std::string& titrant) {
    const auto* use = titrant_use(m, titrant);
    if (!use)
      return nullptr;
    auto it = inst_.burettes.find(use->burette);
    return it == inst_.burettes.end() ? nullptr : it->second;
  }

  std::optional<Failure> add_reagent(const method::Method& m, const method::AddReagentStep& s) {
    auto pump = pump_for(m, s.reagent);
    if (!pump)
      return Failure{Reach::series, "no doser pump set up for reagent '" + s.reagent + "'"};
    auto r = pump->doser->add(pump->reagent, s.volume_ml, options_.reagent_rate_ml_per_min);
    if (!r)
      return device_failure("doser, adding " + s.reagent, r.error());
    return std::nullopt;
  }

  std::optional<Pump> pump_for(const method::Method& m, const std::string& reagent) {
    for (const auto& r : m.reagents) {
      if (r.name != reagent)
        continue;
      auto it = inst_.pumps.find(r.doser);
      if (it != inst_.pumps.end() && it->second.doser)
        return it->second;
    }
    return std::nullopt;
  }

  Result<double> read_ph() {
    auto reading = inst_.sensor.read();
    if (!reading)
      return reading.error();
    if (!reading->ph)
      return make_error(ErrorKind::invalid_input,
                        "the meter reports no pH: adjusting the pH needs a meter with a pH input");
    return *reading->ph;
  }

  /// Doses acid or base until the pH is within the tolerance: the first
  /// dose is small; each later one is sized from the pH change per mL the
  /// doses so far caused (a secant step, 80 % of the way, bounded).
  std::optional<Failure> adjust_ph(const method::Method& m, const method::AdjustPhStep& s) {
    auto ph = read_ph();
    if (!ph)
      return device_failure("pH reading", ph.error());
    double total_ml = 0.0;
    double slope_per_ml = 0.0;  // |pH change| per mL, from the last dose
    while (std::abs(*ph - s.target_ph) > s.tolerance_ph) {
      const bool raise = *ph < s.target_ph;
      const std::string& reagent = raise ? s.base : s.acid;
      if (reagent.empty())
        return Failure{Reach::sample, "pH " + fixed(*ph, 2) + " needs " +
                                          (raise ? std::string("base") : std::string("acid")) +
                                          " and the method names none"};
      auto pump = pump_for(m, reagent);
      if (!pump)
        return Failure{Reach::series, "no doser pump set up for reagent '" + reagent + "'"};
      double dose = options_.ph_first_dose_ml;
      if (slope_per_ml > 0.0)
        dose = 0.8 * std::abs(s.target_ph - *ph) / slope_per_ml;
      dose = std::clamp(dose, options_.ph_smallest_dose_ml, options_.ph_largest_dose_ml);
      if (total_ml + dose > s.largest_total_volume_ml)
        return Failure{Reach::sample, "pH " + fixed(*ph, 2) + " not brought to " +
                                          fixed(s.target_ph, 2) + " within " +
                                          fixed(s.largest_total_volume_ml, 2) +
                                          " mL of acid and base"};
      auto added = pump->doser->add(pump->reagent, dose, options_.reagent_rate_ml_per_min);
      if (!added)
        return device_failure("doser, adding " + reagent, added.error());
      total_ml += dose;
      inst_.clock.sleep_for(drivers::from_seconds(options_.ph_wait_s));
      auto now_ph = read_ph();
      if (!now_ph)
        return device_failure("pH reading", now_ph.error());
      slope_per_ml = std::abs(*now_ph - *ph) / dose;
      ph = now_ph;
    }
    say("pH " + fixed(*ph, 2) + " after " + fixed(total_ml, 3) + " mL of acid or base");
    return std::nullopt;
  }

  std::optional<Failure> add_titrant(const method::Method& m, const method::AddTitrantStep& s) {
    auto* burette = burette_for(m, s.titrant);
    if (!burette)
      return Failure{Reach::series, "no burette set up for titrant '" + s.titrant + "'"};
    double left = s.volume_ml;
    const double largest = burette->info().max_dose_ml > 0.0 ? burette->info().max_dose_ml : left;
    while (left > 1e-9) {
      auto status = burette->status();
      if (!status)
        return device_failure("burette for " + s.titrant, status.error());
      const double dose = std::min(left, largest);
      if (status->cylinder_content_ml + 1e-9 < dose) {
        auto filled = burette->fill(options_.titrant_add_rate_ml_per_min * 3.0);
        if (!filled)
          return device_failure("burette for " + s.titrant + ", filling", filled.error());
        if (filled->cylinder_content_ml + 1e-9 < dose)
          return Failure{Reach::series, "the reservoir of '" + s.titrant + "' is empty"};
      }
      auto dosed = burette->dose(dose, options_.titrant_add_rate_ml_per_min);
      if (!dosed)
        return device_failure("burette for " + s.titrant + ", adding the excess", dosed.error());
      left -= dose;
    }
    return std::nullopt;
  }

  /// The rule of the result a stage (1-based) gives at its first endpoint,
  /// for the run's record; the first result if none names it.
  static const method::ResultRule& rule_of_stage(const method::Method& m, int stage) {
    const int stages = static_cast<int>(method::titration_stages(m.steps).size());
    std::vector<const method::ResultRule*> rules{&m.result};
    for (const auto& r : m.more_results)
      rules.push_back(&r);
    for (const auto* r : rules)
      if ((r->stage == 0 ? stages : r->stage) == stage && r->endpoint <= 1)
        return *r;
    return m.result;
  }

  std::optional<Failure> titrate(const Entry& entry, const method::Method& m,
                                 const method::TitrateStep& s, bool back_titration,
                                 std::size_t step_index, const Portion& portion, Measured& got,
                                 const std::optional<method::Readiness>& ready,
                                 std::optional<controller::RunOutcome>& last_run) {
    auto* burette = burette_for(m, s.titrant);
    if (!burette)
      return Failure{Reach::series, "no burette set up for titrant '" + s.titrant + "'"};
    auto plan = controller::dosing_plan_from_json(method::dosing_plan_json(s));
    if (!plan)
      return Failure{Reach::series, "method '" + m.name + "': " + plan.error().message};
    controller::TitrationMethod tm;
    tm.name = m.name + " (version " + std::to_string(m.version) + ")";
    tm.dosing = *plan;
    tm.initial_volume_ml = s.initial_volume_ml;
    tm.max_volume_ml = s.largest_volume_ml;
    tm.volume_past_endpoint_ml = s.volume_past_endpoint_ml;
    tm.endpoint_count = s.endpoints;
    tm.time_limit_s = s.time_limit_s;
    tm.settling.drift_limit_per_min = s.drift_limit_per_min;
    tm.settling.window_s = s.settling_window_s;
    tm.settling.min_wait_s = s.shortest_wait_s;
    tm.settling.max_wait_s = s.longest_wait_s;
    // The evaluate step after the titration names the endpoint method.
    for (std::size_t j = step_index + 1; j < m.steps.size(); ++j) {
      if (const auto* e = std::get_if<method::EvaluateStep>(&m.steps[j])) {
        tm.endpoint_method = e->endpoint_method;
        tm.endpoint_options = e->options;
        break;
      }
      if (std::holds_alternative<method::TitrateStep>(m.steps[j]) ||
          std::holds_alternative<method::BackTitrateStep>(m.steps[j]))
        break;
    }
    controller::SampleDescription sample;
    sample.sample_id = entry.id;
    sample.series = series_.name;
    sample.sample_volume_ml =
        portion.aliquot_ml > 0.0 ? portion.aliquot_ml : options_.dissolved_in_ml;
    const method::ResultRule& rule = rule_of_stage(m, static_cast<int>(got.stages.size()) + 1);
    sample.metal = rule.analyte;
    sample.metal_molar_mass_g_per_mol =
        rule.molar_mass_g_per_mol > 0.0 ? rule.molar_mass_g_per_mol : 1.0;
    sample.metal_per_titrant = rule.analyte_per_titrant;
    sample.titrant_name = s.titrant;
    sample.titrant_conc_mol_per_l = nominal_conc(s.titrant);
    if (ready)
      for (const auto& t : ready->titers)
        if (t.titrant == s.titrant)
          sample.titrant_conc_mol_per_l = t.conc_mol_per_l;
    controller::Instruments instruments{*burette, inst_.sensor, inst_.clock};
    controller::RunControl control;
    control.also_abort = abort_;
    auto outcome =
        controller::run_titration(instruments, stores_.runs, sample, tm, observer_, &control);
    StageMeasured stage;
    stage.run_id = outcome.run_id;
    stage.evaluation_id = outcome.evaluation_id;
    stage.titrated_with = s.titrant;
    stage.back_titration = back_titration;
    if (back_titration) {
      stage.excess_ml = got.excess_ml;
      stage.excess_titrant = got.excess_titrant;
      got.excess_ml = 0.0;
      got.excess_titrant.clear();
    }
    if (outcome.run_id > 0) {
      entry_->run_ids.push_back(outcome.run_id);
      (void)stores_.methods.record_method_use(outcome.run_id, m.name, m.version);
    }
    if (!outcome.burette_stopped)
      outcome_.burettes_stopped = false;
    last_run = outcome;
    if (outcome.status == store::RunStatus::completed && outcome.endpoint) {
      stage.endpoint_ml = outcome.endpoint->volume_ml;
      stage.endpoint_uncertainty_ml = outcome.endpoint->uncertainty_ml;
      for (const auto& e : outcome.endpoints)
        stage.endpoints.push_back({e.volume_ml, e.uncertainty_ml});
      if (stage.endpoints.empty())
        stage.endpoints.push_back({stage.endpoint_ml, stage.endpoint_uncertainty_ml});
      // All the stage dosed: its last point, as the store keeps it. What
      // went past the endpoint stays in the vessel for a later stage.
      auto points = stores_.runs.load_points(outcome.run_id);
      if (!points)
        return Failure{Reach::series, "cannot read run " + std::to_string(outcome.run_id) +
                                          " back: " + points.error().describe()};
      stage.dosed_ml = points->empty() ? 0.0 : points->back().volume_ml;
      got.stages.push_back(stage);
      return std::nullopt;
    }
    got.stages.push_back(stage);
    // No endpoint is this vessel's problem; anything else (a device, an
    // empty reservoir, the store) is the series'.
    if (outcome.reason.rfind("no endpoint found", 0) == 0)
      return Failure{Reach::determination, outcome.reason};
    return Failure{Reach::series, "run " + std::to_string(outcome.run_id) + " " +
                                      store::run_status_name(outcome.status) + ": " +
                                      outcome.reason};
  }

  /// What a value rests on, for the record: method version, the endpoint
  /// method and its options, titers with their titrant lots, the
  /// calibration, each burette's last gravimetric check, the instruments,
  /// the software version.
  json traceability(const method::Method& m, const Measured& got,
                    const std::optional<method::Readiness>& ready) {
    json t;
    t["method"] = {{"name", m.name}, {"version", m.version}};
    for (const auto& step : m.steps)
      if (const auto* e = std::get_if<method::EvaluateStep>(&step))
        t["endpoint_method"] = {{"name", e->endpoint_method}, {"options", e->options}};
    t["titers"] = json::array();
    if (ready)
      for (const auto& titer : ready->titers) {
        auto record = stores_.methods.load_titrant(titer.titrant);
        t["titers"].push_back({{"titrant", titer.titrant},
                               {"titer_id", titer.titer_id},
                               {"conc_mol_per_l", titer.conc_mol_per_l},
                               {"lot", record ? record->lot : std::string()},
                               {"expires_utc", titer.expires_utc}});
      }
    if (ready && ready->calibration)
      t["calibration"] = {{"id", ready->calibration->id},
                          {"electrode", ready->calibration->electrode},
                          {"slope_mv_per_decade", ready->calibration->slope_mv_per_decade},
                          {"measured_utc", ready->calibration->measured_utc}};
    t["burettes"] = json::array();
    for (const auto& use : m.titrants) {
      json b = {{"burette", use.burette}, {"titrant", use.name}};
      if (auto it = inst_.burettes.find(use.burette); it != inst_.burettes.end() && it->second)
        b["instrument"] = it->second->describe();
      if (auto checks = stores_.series.burette_check_history(use.burette);
          checks && !checks->empty())
        b["last_check"] = {{"id", checks->back().id},
                           {"checked_utc", checks->back().checked_utc},
                           {"passed", checks->back().passed}};
      else
        b["last_check"] = nullptr;
      t["burettes"].push_back(b);
    }
    t["sensor"] = inst_.sensor.describe();
    t["runs"] = {got.run_id(0), got.run_id(1)};
    for (std::size_t k = 2; k < got.stages.size(); ++k)
      t["runs"].push_back(got.run_id(k));
    // The evaluation each run's endpoints came from: a reviewer who later
    // chooses another one for a run sees which values rest on the old one
    // (controller::evaluations_used, `veq series show`).
    t["evaluations"] = json::array();
    for (const auto& g : got.stages)
      t["evaluations"].push_back({{"run", g.run_id}, {"evaluation", g.evaluation_id}});
    t["software_version"] = kVersion;
    return t;
  }

  double nominal_conc(const std::string& titrant) {
    auto t = stores_.methods.load_titrant(titrant);
    return t ? t->nominal_conc_mol_per_l : 0.0;
  }

  /// Titer factor (found / nominal) of a titrant for a sample's result; 1 for
  /// entries that measure with nominal values.
  double titer_factor(const std::string& titrant, const std::optional<method::Readiness>& ready) {
    if (!ready)
      return 1.0;
    const double nominal = nominal_conc(titrant);
    for (const auto& t : ready->titers)
      if (t.titrant == titrant && nominal > 0.0)
        return t.conc_mol_per_l / nominal;
    return 1.0;
  }

  std::string unit_of(const Entry& entry, const method::ResultRule& rule) const {
    switch (entry.kind) {
      case EntryKind::blank:
      case EntryKind::conditioning:
        return "mL";
      case EntryKind::titer:
        return "mol/L";
      default:
        return rule.unit;
    }
  }

  /// The titrant a result rule counts in one determination: the stage's
  /// endpoint, or titrant counted over stages (titrant_between), less an
  /// earlier result's (without its blank: see compute_values). For a
  /// back-titration stage: the excess less what was titrated back, as a
  /// volume of the first titrant.
  Result<RuleVolume> rule_volume(const method::Method& m, const method::ResultRule& rule,
                                 const Measured& got,
                                 const std::optional<method::Readiness>& ready) {
    const int count = static_cast<int>(got.stages.size());
    const int stage = rule.stage == 0 ? count : rule.stage;
    if (stage < 1 || stage > count)
      return make_error(ErrorKind::invalid_input,
                        "result '" + rule.analyte + "' needs stage " + std::to_string(stage) +
                            " but the vessel was titrated in " + std::to_string(count));
    const StageMeasured& st = got.stages[static_cast<std::size_t>(stage - 1)];
    RuleVolume out;
    out.stage = stage;
    out.detail = {{"stage", stage},
                  {"endpoint_ml", st.endpoint_ml},
                  {"endpoint_uncertainty_ml", st.endpoint_uncertainty_ml},
                  {"titrant", st.titrated_with}};
    if (st.back_titration) {
      out.detail["excess_ml"] = st.excess_ml;
      out.detail["excess_titrant"] = st.excess_titrant;
      const double c1 = nominal_conc(st.excess_titrant);
      const double c2 = nominal_conc(st.titrated_with);
      if (c1 <= 0.0 || c2 <= 0.0)
        return make_error(
            ErrorKind::invalid_input,
            "titrant '" + (c1 <= 0.0 ? st.excess_titrant : st.titrated_with) + "' is not stored");
      const double t2 = titer_factor(st.titrated_with, ready);
      out.titrant = st.excess_titrant;
      out.volume_ml =
          st.excess_ml - st.endpoint_ml * c2 * t2 / (c1 * titer_factor(st.excess_titrant, ready));
      out.uncertainty_ml = st.endpoint_uncertainty_ml;
      out.detail["back_titrant_titer"] = t2;
      return out;
    }
    out.titrant = st.titrated_with;
    // Each endpoint of a curve with several counts as a stage of its own
    // that ends where it was reached: endpoint k of a stage reads
    // E_k - E_(k-1) with all of it dosed there, and only the last goes on
    // to what the stage dosed. Counting from a stage's start, or from the
    // endpoint before (in the same curve or the stage before), is then
    // titrant_between over these readings, the uncertainty of each endpoint
    // its own (the absolute endpoint's).
    std::vector<controller::StageReading> readings;
    std::vector<std::size_t> first_reading;  // per stage, 1-based index into readings
    for (const auto& g : got.stages) {
      first_reading.push_back(readings.size() + 1);
      if (g.endpoints.size() <= 1) {
        readings.push_back({g.endpoint_ml, g.dosed_ml, g.endpoint_uncertainty_ml});
        continue;
      }
      double before = 0.0;
      for (std::size_t k = 0; k < g.endpoints.size(); ++k) {
        const double part = g.endpoints[k].volume_ml - before;
        const bool last = k + 1 == g.endpoints.size();
        readings.push_back(
            {part, last ? g.dosed_ml - before : part, g.endpoints[k].uncertainty_ml});
        before = g.endpoints[k].volume_ml;
      }
    }
    const std::size_t endpoints_here = std::max<std::size_t>(1, st.endpoints.size());
    const std::size_t which =
        rule.endpoint == 0 ? endpoints_here : static_cast<std::size_t>(rule.endpoint);
    if (which > endpoints_here)
      return make_error(ErrorKind::invalid_input, "result '" + rule.analyte + "' needs endpoint " +
                                                      std::to_string(which) + " of stage " +
                                                      std::to_string(stage) + ", which found " +
                                                      std::to_string(endpoints_here));
    const std::size_t to = first_reading[static_cast<std::size_t>(stage - 1)] + which - 1;
    std::size_t from = first_reading[static_cast<std::size_t>(stage - 1)];
    bool from_endpoint = false;
    if (rule.counted_from == method::CountedFrom::previous_endpoint) {
      from = to - 1;
      from_endpoint = true;
    } else if (rule.counted_from == method::CountedFrom::first_stage_start) {
      from = 1;
    }
    auto counted = controller::titrant_between(readings, from, from_endpoint, to);
    if (!counted)
      return counted.error();
    out.volume_ml = counted->volume_ml;
    out.uncertainty_ml = counted->uncertainty_ml;
    if (st.endpoints.size() > 1) {
      out.detail["endpoint"] = which;
      out.detail["endpoint_ml"] = st.endpoints[which - 1].volume_ml;
      out.detail["endpoint_uncertainty_ml"] = st.endpoints[which - 1].uncertainty_ml;
    }
    if (!m.more_results.empty() || rule.counted_from != method::CountedFrom::stage_start) {
      out.detail["counted_from"] = method::counted_from_name(rule.counted_from);
      out.detail["counted_ml"] = counted->volume_ml;
      json stages = json::array();
      for (const auto& g : got.stages) {
        json one = {{"run_id", g.run_id}, {"endpoint_ml", g.endpoint_ml}, {"dosed_ml", g.dosed_ml}};
        if (g.endpoints.size() > 1) {
          json all = json::array();
          for (const auto& e : g.endpoints)
            all.push_back(e.volume_ml);
          one["endpoints_ml"] = all;
        }
        stages.push_back(one);
      }
      out.detail["stages"] = stages;
    }
    return out;
  }

  /// The values of one determination, one per rule: blank volumes, a titer
  /// concentration, or the sample's content of each analyte. Each result
  /// subtracts its own blank (the blank vessel's titrant counted by the same
  /// rule); a result `less` an earlier one is the difference of the two
  /// amounts (controller::amounts_from_total_and_first).
  Result<std::vector<Value>> compute_values(const Entry& entry, const method::Method& m,
                                            const std::vector<method::ResultRule>& rules,
                                            const Measured& got, const Portion& portion,
                                            const std::optional<method::Readiness>& ready) {
    std::vector<Value> out;
    std::map<std::string, RuleVolume> counted;  // by analyte, before any difference
    for (const auto& rule : rules) {
      auto rv = rule_volume(m, rule, got, ready);
      if (!rv)
        return rv.error();
      counted[rule.analyte] = *rv;
      auto v =
          compute_value(entry, m, rule, *rv, rule.less.empty() ? nullptr : &counted.at(rule.less),
                        got, portion, ready);
      if (!v)
        return v.error();
      if (rules.size() > 1)
        v->detail["result"] = rule.analyte;
      out.push_back(std::move(*v));
    }
    return out;
  }

  /// The value of one rule; `less`: the counted titrant of the result it
  /// subtracts, if any.
  Result<Value> compute_value(const Entry& entry, const method::Method& m,
                              const method::ResultRule& rule, const RuleVolume& rv,
                              const RuleVolume* less, const Measured& got, const Portion& portion,
                              const std::optional<method::Readiness>& ready) {
    Value v;
    v.stage = rv.stage;
    v.titrant = rv.titrant;
    const double blank = blank_ml_.count(blank_key(m, rule.analyte))
                             ? blank_ml_.at(blank_key(m, rule.analyte))
                             : 0.0;
    v.detail = rv.detail;
    v.detail["position"] = got.position;
    v.detail["traceability"] = traceability(m, got, ready);
    const double c1 = nominal_conc(rv.titrant);
    if (c1 <= 0.0)
      return make_error(ErrorKind::invalid_input, "titrant '" + rv.titrant + "' is not stored");
    const double t1 = titer_factor(rv.titrant, ready);
    double reacted_ml = rv.volume_ml;
    v.uncertainty_ml = rv.uncertainty_ml;
    if (less) {
      reacted_ml -= less->volume_ml;
      v.uncertainty_ml = std::hypot(rv.uncertainty_ml, less->uncertainty_ml);
      v.detail["less"] = {{"result", rule.less}, {"volume_ml", less->volume_ml}};
    }
    // The budget's titrant volume: a one-stage result keeps its endpoint as
    // read (as before stages existed), a counted one its counted volume.
    const bool counted =
        less || rule.counted_from != method::CountedFrom::stage_start || rule.endpoint != 0;
    v.volume_ml =
        counted ? reacted_ml : got.stages[static_cast<std::size_t>(rv.stage - 1)].endpoint_ml;
    switch (entry.kind) {
      case EntryKind::blank:
      case EntryKind::conditioning:
        v.value = reacted_ml;
        return v;
      case EntryKind::titer: {
        controller::TiterDetermination d;
        d.standard_mass_g = portion.mass_g;
        d.standard_purity_percent = entry.standard_purity_percent;
        d.standard_molar_mass_g_per_mol = entry.standard_molar_mass_g_per_mol;
        d.titrant_per_standard = entry.titrant_per_standard;
        d.endpoint_ml = reacted_ml;
        d.blank_ml = blank;
        d.nominal_conc_mol_per_l = c1;
        auto titer = controller::titer_from_standard(d);
        if (!titer)
          return titer.error();
        v.value = titer->conc_mol_per_l;
        v.detail["mass_g"] = portion.mass_g;
        v.detail["blank_ml"] = blank;
        v.detail["titer"] = titer->titer;
        return v;
      }
      default:
        break;
    }
    double amount_mol = 0.0;
    if (less) {
      // The difference: this rule's titrant (with the blank of both) less
      // the earlier result's (with its own blank), both at this analyte's
      // stoichiometry.
      const double less_blank =
          blank_ml_.count(blank_key(m, rule.less)) ? blank_ml_.at(blank_key(m, rule.less)) : 0.0;
      controller::TitrantVolume total{c1, t1, rv.volume_ml, blank + less_blank,
                                      rule.analyte_per_titrant};
      controller::TitrantVolume first{c1, t1, less->volume_ml, less_blank,
                                      rule.analyte_per_titrant};
      auto both = controller::amounts_from_total_and_first(total, first);
      if (!both)
        return both.error();
      amount_mol = both->second_mol;
    } else {
      controller::TitrantVolume tv;
      tv.nominal_conc_mol_per_l = c1;
      tv.titer = t1;
      tv.volume_ml = reacted_ml;
      tv.blank_ml = blank;
      tv.analyte_per_titrant = rule.analyte_per_titrant;
      auto amount = controller::analyte_amount_mol(tv);
      if (!amount)
        return amount.error();
      amount_mol = *amount;
    }
    if (amount_mol <= 0.0)
      return make_error(ErrorKind::invalid_input,
                        "no " + rule.analyte + " above the blank (" + fixed(reacted_ml, 4) +
                            " mL against a blank of " + fixed(blank, 4) + " mL)");
    controller::SampleSize size;
    size.aliquot_ml = portion.aliquot_ml;
    size.mass_g = portion.mass_g;
    size.dilution_factor = entry.dilution_factor;
    size.density_g_per_ml = entry.density_g_per_ml;
    auto unit = controller::result_unit_from_name(rule.unit);
    if (!unit)
      return make_error(ErrorKind::invalid_input, "unknown result unit '" + rule.unit + "'");
    auto conc = controller::concentration(amount_mol, size, *unit, rule.molar_mass_g_per_mol);
    if (!conc)
      return conc.error();
    v.value = *conc;
    v.detail["reacted_ml"] = reacted_ml;
    v.detail["blank_ml"] = blank;
    v.detail["titer"] = t1;
    v.detail["amount_mol"] = amount_mol;
    v.detail["aliquot_ml"] = portion.aliquot_ml;
    v.detail["mass_g"] = portion.mass_g;
    v.detail["dilution_factor"] = entry.dilution_factor;
    return v;
  }

  // ---- calibration and burette check ------------------------------------

  /// A settled potential: read every second until the drift over the last
  /// 10 s is within the limit, or until the longest wait.
  Result<drivers::PotentialReading> settled_reading(double drift_limit_mv_per_min,
                                                    double longest_wait_s) {
    std::vector<double> times;
    std::vector<double> values;
    const double start = inst_.clock.now_s();
    while (true) {
      auto r = inst_.sensor.read();
      if (!r)
        return r.error();
      const double t = inst_.clock.now_s() - start;
      times.push_back(t);
      values.push_back(r->potential_mv);
      while (!times.empty() && times.back() - times.front() > 10.0) {
        times.erase(times.begin());
        values.erase(values.begin());
      }
      if (t >= 10.0 && std::abs(controller::least_squares_slope_per_min(times, values)) <=
                           drift_limit_mv_per_min) {
        drivers::PotentialReading out = *r;
        out.potential_mv = std::accumulate(values.end() - 3, values.end(), 0.0) / 3.0;
        return out;
      }
      if (t >= longest_wait_s)
        return make_error(
            ErrorKind::timeout,
            "the potential did not settle within " + fixed(longest_wait_s, 0) + " s (drift " +
                fixed(controller::least_squares_slope_per_min(times, values), 2) + " mV/min)");
      inst_.clock.sleep_for(drivers::from_seconds(1.0));
    }
  }

  std::optional<Failure> run_calibration(const Entry& entry) {
    std::vector<controller::CalibrationStandard> standards;
    double temperature = 0.0;
    for (std::size_t i = 0; i < entry.positions.size(); ++i) {
      if (aborted())
        return Failure{Reach::series, "aborted by the operator"};
      if (auto f = bring_vessel(entry.positions[i]))
        return f;
      inst_.clock.sleep_for(drivers::from_seconds(5.0));
      auto reading = settled_reading(entry.settle_limit_mv_per_min, entry.longest_wait_s);
      if (auto f = take_vessel_away())
        return f;
      if (!reading)
        return Failure{Reach::series, "calibration standard " + std::to_string(i + 1) +
                                          " (position " + std::to_string(entry.positions[i]) +
                                          "): " + reading.error().describe()};
      standards.push_back({entry.standard_conc_mol_per_l[i], reading->potential_mv});
      temperature += reading->temperature_c;
      store::DeterminationRecord d;
      d.entry_id = entry_->entry_id;
      d.replicate = static_cast<int>(i + 1);
      d.position = entry.positions[i];
      d.value = reading->potential_mv;
      d.unit = "mV";
      d.detail_json = json{{"conc_mol_per_l", entry.standard_conc_mol_per_l[i]},
                           {"temperature_c", reading->temperature_c}}
                          .dump();
      if (auto f = store_determination(d))
        return f;
    }
    controller::CalibrationOptions options = options_.calibration;
    options.temperature_c = temperature / static_cast<double>(standards.size());
    options.charge = entry.charge;
    auto cal = controller::calibrate_electrode(standards, options);
    if (!cal)
      return Failure{Reach::series,
                     "calibration of '" + entry.electrode + "': " + cal.error().message};
    store::CalibrationRecord rec;
    rec.electrode = entry.electrode;
    rec.slope_mv_per_decade = cal->slope_mv_per_decade;
    rec.e0_mv = cal->e0_mv;
    rec.temperature_c = cal->temperature_c;
    rec.accepted = cal->accepted;
    rec.measured_utc = method::format_utc(now());
    rec.expires_utc =
        method::format_utc(now() + std::chrono::milliseconds(static_cast<std::int64_t>(
                                       options.valid_for_hours * 3600.0 * 1000.0)));
    if (auto stored = stores_.methods.add_calibration(rec); !stored)
      return Failure{Reach::series, stored.error().describe()};
    store::EntryResultRecord r;
    r.entry_id = entry_->entry_id;
    r.name = "slope";
    r.value = cal->slope_mv_per_decade;
    r.unit = "mV/decade";
    r.count = cal->standards;
    r.sd = cal->slope_uncertainty_mv_per_decade;
    r.rsd_percent =
        cal->slope_mv_per_decade != 0.0
            ? std::abs(cal->slope_uncertainty_mv_per_decade / cal->slope_mv_per_decade) * 100.0
            : 0.0;
    r.detail_json = json{{"e0_mv", cal->e0_mv},
                         {"slope_percent_of_nernst", cal->slope_percent_of_nernst},
                         {"nernst_slope_mv_per_decade", cal->nernst_slope_mv_per_decade},
                         {"residual_sd_mv", cal->residual_sd_mv},
                         {"temperature_c", cal->temperature_c},
                         {"accepted", cal->accepted},
                         {"expires_utc", rec.expires_utc}}
                        .dump();
    entry_->values = {cal->slope_mv_per_decade};
    entry_->mean = cal->slope_mv_per_decade;
    entry_->unit = "mV/decade";
    if (!cal->accepted) {
      flag("calibration refused: " + cal->reason);
      r.flags = flags_text();
    }
    if (auto stored = stores_.series.add_entry_result(r); !stored)
      return Failure{Reach::series, stored.error().describe()};
    say("calibration of '" + entry.electrode + "': slope " + fixed(cal->slope_mv_per_decade, 2) +
        " mV/decade (" + fixed(cal->slope_percent_of_nernst, 1) + " % of Nernst), E0 " +
        fixed(cal->e0_mv, 1) + " mV" + (cal->accepted ? "" : ", refused: " + cal->reason));
    if (!cal->accepted)
      return Failure{Reach::series,
                     "calibration of '" + entry.electrode + "' refused: " + cal->reason};
    return std::nullopt;
  }

  std::optional<Failure> run_burette_check(const Entry& entry) {
    auto it = inst_.burettes.find(entry.burette);
    if (it == inst_.burettes.end() || !it->second)
      return Failure{Reach::series, "no burette '" + entry.burette + "' set up"};
    if (!inst_.balance)
      return Failure{Reach::series, "a burette check needs a balance"};
    drivers::BuretteClient& burette = *it->second;
    if (auto f = bring_vessel(entry.positions.front()))
      return f;
    if (inst_.stirrer)
      (void)inst_.stirrer->stop();  // a stirring bar disturbs the weighing
    controller::BuretteCheckInput input;
    input.nominal_volume_ml = entry.nominal_volume_ml;
    input.test_volume_ml = entry.test_volume_ml;
    input.water_temperature_c = entry.water_temperature_c;
    const double largest =
        burette.info().max_dose_ml > 0.0 ? burette.info().max_dose_ml : entry.test_volume_ml;
    for (int k = 0; k < entry.deliveries; ++k) {
      if (aborted())
        return Failure{Reach::series, "aborted by the operator"};
      auto filled = burette.fill(options_.titrant_add_rate_ml_per_min * 3.0);
      if (!filled)
        return device_failure("burette '" + entry.burette + "', filling", filled.error());
      if (filled->cylinder_content_ml + 1e-9 < entry.test_volume_ml)
        return Failure{Reach::series, "the reservoir of burette '" + entry.burette + "' is empty"};
      auto before = inst_.balance->read_stable();
      if (!before)
        return device_failure("balance", before.error());
      double left = entry.test_volume_ml;
      while (left > 1e-9) {
        const double dose = std::min(left, largest);
        auto dosed = burette.dose(dose, options_.titrant_add_rate_ml_per_min);
        if (!dosed)
          return device_failure("burette '" + entry.burette + "', delivering", dosed.error());
        left -= dose;
      }
      auto after = inst_.balance->read_stable();
      if (!after)
        return device_failure("balance", after.error());
      input.water_masses_g.push_back(after->mass_g - before->mass_g);
      store::DeterminationRecord d;
      d.entry_id = entry_->entry_id;
      d.replicate = k + 1;
      d.position = entry.positions.front();
      d.value = after->mass_g - before->mass_g;
      d.unit = "g";
      if (auto f = store_determination(d))
        return f;
    }
    if (auto f = take_vessel_away())
      return f;
    auto check = controller::check_burette(input);
    if (!check)
      return Failure{Reach::series,
                     "burette check of '" + entry.burette + "': " + check.error().message};
    store::BuretteCheckRecord rec;
    rec.entry_id = entry_->entry_id;
    rec.burette = entry.burette;
    rec.nominal_volume_ml = entry.nominal_volume_ml;
    rec.test_volume_ml = entry.test_volume_ml;
    rec.water_masses_g = input.water_masses_g;
    rec.water_temperature_c = entry.water_temperature_c;
    rec.mean_volume_ml = check->mean_volume_ml;
    rec.systematic_error_percent = check->systematic_error_percent;
    rec.random_error_percent = check->random_error_percent;
    rec.passed = check->passed;
    rec.limits_source = check->limits_source;
    rec.checked_utc = method::format_utc(now());
    if (auto stored = stores_.series.add_burette_check(rec); !stored)
      return Failure{Reach::series, stored.error().describe()};
    store::EntryResultRecord r;
    r.entry_id = entry_->entry_id;
    r.name = "delivered volume";
    r.value = check->mean_volume_ml;
    r.unit = "mL";
    r.count = static_cast<int>(check->volumes_ml.size());
    r.sd = check->random_error_ul / 1000.0;
    r.rsd_percent = check->random_error_percent;
    r.detail_json = json{
        {"systematic_error_percent", check->systematic_error_percent},
        {"random_error_percent", check->random_error_percent},
        {"systematic_error_ul", check->systematic_error_ul},
        {"systematic_limit_ul", check->limits.systematic_ul},
        {"random_error_ul", check->random_error_ul},
        {"random_limit_ul", check->limits.random_ul},
        {"mass_to_volume_factor_ml_per_g", check->mass_to_volume_factor_ml_per_g},
        {"limits_source", check->limits_source},
        {"passed",
         check->passed}}.dump();
    entry_->values = check->volumes_ml;
    entry_->mean = check->mean_volume_ml;
    entry_->unit = "mL";
    say("burette check of '" + entry.burette + "': systematic " +
        fixed(check->systematic_error_percent, 3) + " %, random " +
        fixed(check->random_error_percent, 3) + " % (" + check->limits_source + ")");
    if (!check->passed)
      flag("burette check failed: systematic " + fixed(check->systematic_error_ul, 1) +
           " µL (limit " + fixed(check->limits.systematic_ul, 1) + " µL), random " +
           fixed(check->random_error_ul, 1) + " µL (limit " + fixed(check->limits.random_ul, 1) +
           " µL)");
    r.flags = flags_text();
    if (auto stored = stores_.series.add_entry_result(r); !stored)
      return Failure{Reach::series, stored.error().describe()};
    if (!check->passed)
      return Failure{Reach::series, "burette '" + entry.burette + "' failed its check"};
    return std::nullopt;
  }

  // ---- small things ------------------------------------------------------

  std::optional<Failure> store_determination(store::DeterminationRecord& d) {
    auto id = stores_.series.add_determination(d);
    if (!id)
      return Failure{Reach::series, id.error().describe()};
    d.id = *id;
    if (observer_)
      observer_->on_determination(d);
    return std::nullopt;
  }

  void flag(const std::string& why) {
    flagged_ = true;
    flags_.push_back(why);
    notes_.push_back(why);
    say("flagged: " + why);
  }

  std::string flags_text() {
    std::string out;
    for (const auto& f : flags_)
      out += (out.empty() ? "" : "; ") + f;
    flags_.clear();
    return out;
  }

  void say(const std::string& text) {
    if (observer_)
      observer_->on_message(text);
  }

  bool aborted() const { return abort_ && abort_->load(); }

  method::TimePoint now() const {
    return start_time_ + std::chrono::milliseconds(static_cast<std::int64_t>(
                             (inst_.clock.now_s() - clock_start_s_) * 1000.0));
  }

  void stop_burettes() {
    for (auto& [name, burette] : inst_.burettes) {
      if (!burette)
        continue;
      if (auto r = burette->stop(); !r) {
        outcome_.burettes_stopped = false;
        say("burette '" + name + "' did not confirm the stop: " + r.error().describe());
      }
    }
  }

  const Series& series_;
  const std::string& text_;
  SeriesInstruments& inst_;
  SeriesStores& stores_;
  const SeriesOptions& options_;
  SeriesObserver* observer_;
  const std::atomic<bool>* abort_;
  method::TimePoint start_time_;
  double clock_start_s_ = 0.0;
  SeriesOutcome outcome_;
  EntryOutcome* entry_ = nullptr;
  std::vector<std::string> notes_;
  std::vector<std::string> flags_;
  bool flagged_ = false;
  int replicates_ = 1;  ///< of the entry running
  std::map<std::string, double> blank_ml_;
};

}  // namespace

SeriesOutcome run_series(const Series& series, const std::string& text,
                         SeriesInstruments& instruments, SeriesStores& stores,
                         const SeriesOptions& options, SeriesObserver* observer,
                         const std::atomic<bool>* abort) {
  SeriesRun run(series, text, instruments, stores, options, observer, abort);
  return run.run();
}

}  // namespace veq::series
