#include "ui/review/review_logic.hpp"

#include <algorithm>
#include <cctype>
#include <cmath>
#include <cstdio>
#include <map>
#include <numeric>
#include <regex>

namespace veq::ui::review {

namespace {

std::string lower(std::string text) {
  std::transform(text.begin(), text.end(), text.begin(),
                 [](unsigned char c) { return static_cast<char>(std::tolower(c)); });
  return text;
}

std::string duration_words(std::chrono::milliseconds span) {
  const auto hours = std::chrono::duration_cast<std::chrono::hours>(span).count();
  if (hours >= 48)
    return std::to_string(hours / 24) + " days";
  if (hours >= 1)
    return std::to_string(hours) + (hours == 1 ? " hour" : " hours");
  const auto minutes = std::chrono::duration_cast<std::chrono::minutes>(span).count();
  return std::to_string(minutes) + (minutes == 1 ? " minute" : " minutes");
}

}  // namespace

bool run_matches(const store::RunRecord& run, const RunFilter& filter) {
  // ISO 8601 text sorts as time does, so the day is its first ten characters.
  const std::string day = run.started_utc.substr(0, 10);
  if (!filter.from_day.empty() && day < filter.from_day)
    return false;
  if (!filter.to_day.empty() && day > filter.to_day)
    return false;
  if (!filter.method.empty() && run.run.method_name != filter.method)
    return false;
  if (filter.status && run.status != *filter.status)
    return false;
  if (!filter.text.empty()) {
    const std::string wanted = lower(filter.text);
    const std::string haystack =
        lower(run.run.sample_id + '\n' + run.run.series + '\n' + run.run.method_name + '\n' +
              run.run.titrant_name + '\n' + run.run.burette + '\n' + run.run.sensor + '\n' +
              run.end_reason);
    if (haystack.find(wanted) == std::string::npos)
      return false;
  }
  return true;
}

Result<detection::Curve> stored_curve(store::RunStore& store, std::int64_t run_id) {
  auto run = store.load_run(run_id);
  if (!run)
    return run.error();
  auto points = store.load_points(run_id);
  if (!points)
    return points.error();
  if (points->empty())
    return make_error(ErrorKind::invalid_input,
                      "run " + std::to_string(run_id) + " has no points to evaluate");
  detection::CurveColumns columns;
  for (const auto& p : *points) {
    columns.volume_ml.push_back(p.volume_ml);
    columns.signal.push_back(p.signal);
    columns.time_s.push_back(p.time_s);
    columns.temperature_c.push_back(p.temperature_c);
  }
  columns.kind = static_cast<detection::SignalKind>(run->run.signal_kind);
  columns.sample_volume_ml = run->run.sample_volume_ml;
  auto curve = detection::Curve::from_columns(std::move(columns));
  if (!curve)
    return make_error(curve.error().kind,
                      "run " + std::to_string(run_id) + ": " + curve.error().message);
  return curve;
}

std::string signal_unit_text(int signal_kind) {
  switch (static_cast<detection::SignalKind>(signal_kind)) {
    case detection::SignalKind::potential_mv:
      return "mV";
    case detection::SignalKind::p_metal:
      return "pM";
    case detection::SignalKind::ph:
      return "pH";
    case detection::SignalKind::absorbance:
      return "absorbance";
    case detection::SignalKind::transmittance:
      return "%";
  }
  return "signal units";
}

std::optional<int> error_line(const std::string& message) {
  static const std::regex line_pattern(R"(\bline ([0-9]+))");
  std::smatch match;
  if (!std::regex_search(message, match, line_pattern))
    return std::nullopt;
  return std::stoi(match[1].str());
}

// ---------------------------------------------------------------------------

const char* const kControlRuleText =
    "centre line: mean of the plotted values; warning limits: mean +/- 2 s; action limits: "
    "mean +/- 3 s (Shewhart chart of individual values, ISO 7870-2; limits from the plotted "
    "history: common practice)";

Result<ControlLimits> control_limits(const std::vector<double>& values) {
  std::vector<double> finite;
  for (double v : values)
    if (std::isfinite(v))
      finite.push_back(v);
  if (finite.size() < 3)
    return make_error(ErrorKind::invalid_input, "control limits need at least 3 values, " +
                                                    std::to_string(finite.size()) + " given");
  ControlLimits limits;
  limits.count = static_cast<int>(finite.size());
  limits.mean = std::accumulate(finite.begin(), finite.end(), 0.0) / limits.count;
  double squares = 0.0;
  for (double v : finite)
    squares += (v - limits.mean) * (v - limits.mean);
  limits.sd = std::sqrt(squares / (limits.count - 1));
  limits.lower_action = limits.mean - 3.0 * limits.sd;
  limits.lower_warning = limits.mean - 2.0 * limits.sd;
  limits.upper_warning = limits.mean + 2.0 * limits.sd;
  limits.upper_action = limits.mean + 3.0 * limits.sd;
  return limits;
}

ControlVerdict control_verdict(const ControlLimits& limits, double value) {
  if (value > limits.upper_action || value < limits.lower_action)
    return ControlVerdict::action;
  if (value > limits.upper_warning || value < limits.lower_warning)
    return ControlVerdict::warning;
  return ControlVerdict::within;
}

const char* control_verdict_text(ControlVerdict verdict) {
  switch (verdict) {
    case ControlVerdict::within:
      return "within limits";
    case ControlVerdict::warning:
      return "beyond a warning limit";
    case ControlVerdict::action:
      return "BEYOND AN ACTION LIMIT";
  }
  return "";
}

Result<std::vector<ControlHistory>> control_histories(store::MethodStore& methods,
                                                      store::SeriesStore& series) {
  std::vector<ControlHistory> histories;
  auto titrants = methods.list_titrants();
  if (!titrants)
    return titrants.error();
  for (const auto& titrant : *titrants) {
    auto titers = methods.titer_history(titrant.name);
    if (!titers)
      return titers.error();
    ControlHistory history{"titer of " + titrant.name, "mol/L", {}};
    for (const auto& t : *titers)
      if (t.accepted)
        history.points.push_back(
            ControlPoint{t.determined_utc, t.conc_mol_per_l, "titer " + std::to_string(t.id)});
    if (!history.points.empty())
      histories.push_back(std::move(history));
  }

  // One history per check-standard label and result name, in the order met.
  std::vector<std::string> order;
  std::map<std::string, ControlHistory> checks;
  auto all_series = series.list_series();
  if (!all_series)
    return all_series.error();
  for (const auto& s : *all_series) {
    auto entries = series.load_entries(s.id);
    if (!entries)
      return entries.error();
    for (const auto& entry : *entries) {
      if (entry.kind != "check standard")
        continue;
      auto results = series.load_entry_results(entry.id);
      if (!results)
        return results.error();
      // A check standard repeated within a series is labelled "name #2": the
      // occurrences are one quantity followed over time.
      static const std::regex occurrence(R"( #[0-9]+$)");
      const std::string label = std::regex_replace(entry.label, occurrence, "");
      for (const auto& r : *results) {
        const std::string key = label + '\n' + r.name + '\n' + r.unit;
        if (!checks.count(key)) {
          order.push_back(key);
          checks[key] =
              ControlHistory{"check standard '" + label + "' (" + r.name + ")", r.unit, {}};
        }
        checks[key].points.push_back(ControlPoint{
            entry.finished_utc.empty() ? entry.started_utc : entry.finished_utc, r.value,
            "series " + std::to_string(s.id) + " entry " + std::to_string(entry.id)});
      }
    }
  }
  for (const auto& key : order) {
    auto& h = checks[key];
    std::stable_sort(
        h.points.begin(), h.points.end(),
        [](const ControlPoint& a, const ControlPoint& b) { return a.when_utc < b.when_utc; });
    histories.push_back(std::move(h));
  }
  return histories;
}

// ---------------------------------------------------------------------------

ExpiryStatus expiry_status(bool accepted, const std::string& expires_utc, method::TimePoint now) {
  if (!accepted)
    return {Freshness::refused, "not accepted"};
  auto expires = method::parse_utc(expires_utc);
  if (!expires)
    return {Freshness::expired, "EXPIRED: expiry date unreadable ('" + expires_utc + "')"};
  const std::string when = readable_utc(expires_utc);
  if (*expires <= now)
    return {Freshness::expired,
            "EXPIRED " + duration_words(now - *expires) + " ago (" + when + ")"};
  if (*expires - now <= kExpiryWarning)
    return {Freshness::expires_soon,
            "expires in " + duration_words(*expires - now) + " (" + when + ")"};
  return {Freshness::valid, "valid for " + duration_words(*expires - now) + " (" + when + ")"};
}

std::string readable_utc(const std::string& iso_utc) {
  // "2026-12-02T01:48:22.123Z" -> "2026-12-02 01:48 UTC"
  if (iso_utc.size() < 16 || iso_utc[10] != 'T')
    return iso_utc;
  return iso_utc.substr(0, 10) + ' ' + iso_utc.substr(11, 5) + " UTC";
}

}  // namespace veq::ui::review
