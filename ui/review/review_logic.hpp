// The rules behind the review views, without any Qt: which runs a filter
// keeps, a stored run's curve, an evaluation turned into a store record,
// control-chart limits, and whether a titer or calibration still holds. The
// widgets only show what these functions compute, so the tests check them
// directly as well as through the widgets.
#pragma once

#include <cstdint>
#include <optional>
#include <string>
#include <vector>

#include "common/result.hpp"
#include "controller/method/utc_time.hpp"
#include "controller/store/method_store.hpp"
#include "controller/store/run_store.hpp"
#include "controller/store/series_store.hpp"
#include "detection/curve.hpp"
#include "detection/endpoint.hpp"

namespace veq::ui::review {

// ---------------------------------------------------------------------------
// Runs

/// Which runs the results view lists. Empty fields do not filter.
struct RunFilter {
  /// First and last day (UTC, "YYYY-MM-DD"), both included; compared with
  /// the day the run started.
  std::string from_day;
  std::string to_day;
  std::string method;  ///< exact method name
  std::optional<store::RunStatus> status;
  /// Case-insensitive text looked for in the sample id, series, method,
  /// titrant, burette, sensor and end reason.
  std::string text;
};

bool run_matches(const store::RunRecord& run, const RunFilter& filter);

/// A stored run's points as a validated detection curve (signal kind and
/// sample volume from the run). Errors name the run: not found, no points,
/// or the curve's own validation error.
Result<detection::Curve> stored_curve(store::RunStore& store, std::int64_t run_id);

/// The unit of a run's signal for tables ("mV", "pM", "pH", "absorbance", "%").
std::string signal_unit_text(int signal_kind);

/// The line number a method-file error names ("...: line 12, field 'x': ...").
std::optional<int> error_line(const std::string& message);

// ---------------------------------------------------------------------------
// Control chart

/// Limits of a Shewhart chart for individual values: centre line at the mean
/// of the plotted values, warning limits at mean +- 2 s and action limits at
/// mean +- 3 s, s the sample standard deviation (n - 1). The rule is that of
/// ISO 7870-2 (Shewhart control charts) as laboratories use it for check
/// standards (common practice; limits from the plotted history itself).
struct ControlLimits {
  int count = 0;
  double mean = 0.0;
  double sd = 0.0;
  double lower_action = 0.0;
  double lower_warning = 0.0;
  double upper_warning = 0.0;
  double upper_action = 0.0;
};

/// The rule above in one line, for the chart's caption.
extern const char* const kControlRuleText;

/// Needs at least three finite values (two give a standard deviation too
/// uncertain to set limits by: common practice).
Result<ControlLimits> control_limits(const std::vector<double>& values);

/// Where a value stands against the limits.
enum class ControlVerdict { within, warning, action };
ControlVerdict control_verdict(const ControlLimits& limits, double value);
const char* control_verdict_text(ControlVerdict verdict);

/// One quantity followed over time: a titrant's titer or a check standard's
/// result.
struct ControlPoint {
  std::string when_utc;  ///< ISO 8601 UTC
  double value = 0.0;    ///< in the history's unit
  std::string source;    ///< "titer 4", "series 2 entry 7"
};
struct ControlHistory {
  std::string title;  ///< "titer of EDTA 0.01 mol/L", "check standard 'calcium 1.0 mmol/L'"
  std::string unit;   ///< "mol/L", "mmol/L"
  std::vector<ControlPoint> points;  ///< oldest first
};

/// Every accepted titer of every titrant and every check-standard result of
/// every stored series, one history per titrant and per check-standard label
/// and result name, oldest point first.
Result<std::vector<ControlHistory>> control_histories(store::MethodStore& methods,
                                                      store::SeriesStore& series);

// ---------------------------------------------------------------------------
// Expiry

enum class Freshness {
  valid,         ///< accepted and not yet expired
  expires_soon,  ///< accepted, expires within the warning time
  expired,       ///< accepted but past its expiry
  refused,       ///< not accepted
  none,          ///< no record at all
};

/// A state and the words that say it ("EXPIRED 2 days ago (2026-11-30 08:00 UTC)"):
/// the view shows the words, never only a colour.
struct ExpiryStatus {
  Freshness state = Freshness::none;
  std::string text;
};

/// How long before its expiry a record is shown as expiring soon: one day,
/// enough to prepare a new titer before the next working day (common practice).
inline constexpr std::chrono::hours kExpiryWarning{24};

/// `expires_utc` as the store writes it. An unreadable date counts as expired
/// and says so (a record nobody can date must not pass as valid).
ExpiryStatus expiry_status(bool accepted, const std::string& expires_utc, method::TimePoint now);

/// "2026-12-02 01:48 UTC" from the store's ISO 8601 text (the text itself
/// when it cannot be read).
std::string readable_utc(const std::string& iso_utc);

}  // namespace veq::ui::review
