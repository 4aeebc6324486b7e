#include "controller/method/titer.hpp"

#include <cmath>
#include <cstdio>

namespace veq::method {

namespace {

std::string percent(double v) {
  char out[32];
  std::snprintf(out, sizeof out, "%.3g %%", v);
  return out;
}

/// Store times are ISO text; an unreadable one counts as never valid.
std::optional<TimePoint> when(const std::string& text) {
  auto t = parse_utc(text);
  if (!t)
    return std::nullopt;
  return *t;
}

}  // namespace

Result<TiterStatistics> titer_statistics(const std::vector<double>& values) {
  if (values.size() < 2) {
    return make_error(
        ErrorKind::invalid_input,
        "a titer's spread needs at least two determinations, got " + std::to_string(values.size()));
  }
  TiterStatistics s;
  s.count = static_cast<int>(values.size());
  double sum = 0.0;
  for (std::size_t i = 0; i < values.size(); ++i) {
    if (!std::isfinite(values[i]) || !(values[i] > 0.0)) {
      return make_error(ErrorKind::invalid_input, "titer determination " + std::to_string(i + 1) +
                                                      " is not a positive concentration");
    }
    sum += values[i];
  }
  s.mean_mol_per_l = sum / static_cast<double>(values.size());
  double squares = 0.0;
  for (double v : values)
    squares += (v - s.mean_mol_per_l) * (v - s.mean_mol_per_l);
  s.sd_mol_per_l = std::sqrt(squares / static_cast<double>(values.size() - 1));
  s.rsd_percent = 100.0 * s.sd_mol_per_l / s.mean_mol_per_l;
  return s;
}

store::TiterRecord judge_titer(const store::TitrantRecord& titrant,
                               const std::vector<double>& values, TimePoint determined_at,
                               const TiterOptions& options) {
  store::TiterRecord r;
  r.titrant = titrant.name;
  r.lot = titrant.lot;
  r.determinations_mol_per_l = values;
  r.determined_utc = format_utc(determined_at);
  r.expires_utc = format_utc(determined_at + options.validity);
  auto stats = titer_statistics(values);
  if (!stats) {
    r.note = "refused: " + stats.error().message;
    return r;
  }
  r.conc_mol_per_l = stats->mean_mol_per_l;
  r.rsd_percent = stats->rsd_percent;
  if (stats->count < options.least_determinations) {
    r.note = "refused: " + std::to_string(stats->count) + " determinations, at least " +
             std::to_string(options.least_determinations) + " needed";
  } else if (stats->rsd_percent > options.largest_rsd_percent) {
    r.note = "refused: relative standard deviation " + percent(stats->rsd_percent) +
             " exceeds the limit of " + percent(options.largest_rsd_percent);
  } else {
    r.accepted = true;
    r.note = "accepted: " + std::to_string(stats->count) +
             " determinations, relative standard deviation " + percent(stats->rsd_percent);
  }
  return r;
}

Result<store::TiterRecord> record_titer(store::MethodStore& store, const std::string& titrant,
                                        const std::vector<double>& values, TimePoint determined_at,
                                        const TiterOptions& options) {
  auto stored = store.load_titrant(titrant);
  if (!stored)
    return stored.error();
  store::TiterRecord r = judge_titer(*stored, values, determined_at, options);
  auto id = store.add_titer(r);
  if (!id)
    return id.error();
  r.id = *id;
  return r;
}

bool titer_valid_at(const store::TiterRecord& titer, TimePoint t) {
  const auto determined = when(titer.determined_utc);
  const auto expires = when(titer.expires_utc);
  return titer.accepted && determined && expires && *determined <= t && t < *expires;
}

std::optional<store::TiterRecord> latest_accepted_titer(
    const std::vector<store::TiterRecord>& titers, const std::string& titrant,
    const std::string& lot, TimePoint t) {
  std::optional<store::TiterRecord> best;
  std::optional<TimePoint> best_time;
  for (const auto& titer : titers) {
    if (!titer.accepted || titer.titrant != titrant || (!lot.empty() && titer.lot != lot))
      continue;
    const auto determined = when(titer.determined_utc);
    if (!determined || *determined > t)
      continue;
    if (!best_time || *determined >= *best_time) {
      best = titer;
      best_time = determined;
    }
  }
  return best;
}

bool calibration_valid_at(const store::CalibrationRecord& c, TimePoint t) {
  const auto measured = when(c.measured_utc);
  const auto expires = when(c.expires_utc);
  return c.accepted && measured && expires && *measured <= t && t < *expires;
}

std::optional<store::CalibrationRecord> latest_accepted_calibration(
    const std::vector<store::CalibrationRecord>& calibrations, const std::string& electrode,
    TimePoint t) {
  std::optional<store::CalibrationRecord> best;
  std::optional<TimePoint> best_time;
  for (const auto& c : calibrations) {
    if (!c.accepted || c.electrode != electrode)
      continue;
    const auto measured = when(c.measured_utc);
    if (!measured || *measured > t)
      continue;
    if (!best_time || *measured >= *best_time) {
      best = c;
      best_time = measured;
    }
  }
  return best;
}

}  // namespace veq::method
