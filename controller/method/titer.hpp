// Titers of titrant solutions: accepting a titer from its individual
// determinations, its expiry, and which titer holds at a given time.
// Electrode calibrations are judged the same way (records computed elsewhere).
#pragma once

#include <chrono>
#include <optional>
#include <string>
#include <vector>

#include "common/result.hpp"
#include "controller/method/utc_time.hpp"
#include "controller/store/method_store.hpp"

namespace veq::method {

struct TiterOptions {
  /// Fewest determinations a titer is accepted from. Three: the least that
  /// gives a standard deviation worth judging (common practice; the issue
  /// asks for at least three).
  int least_determinations = 3;
  /// Largest relative standard deviation of the determinations, %. 0.2 % is
  /// the repeatability usually asked of a titer determination (common practice).
  double largest_rsd_percent = 0.2;
  /// How long an accepted titer holds. Seven days for standard EDTA and metal
  /// solutions kept closed (common practice; each lab sets its own).
  std::chrono::milliseconds validity = std::chrono::days{7};
};

/// Mean, sample standard deviation (n - 1) and RSD of determinations.
struct TiterStatistics {
  int count = 0;
  double mean_mol_per_l = 0.0;
  double sd_mol_per_l = 0.0;
  double rsd_percent = 0.0;
};
/// Needs two or more finite, positive values.
Result<TiterStatistics> titer_statistics(const std::vector<double>& determinations_mol_per_l);

/// Judges determinations of `titrant` made at `determined_at`: accepted if
/// there are enough of them and their RSD is within the limit; the note says
/// why not otherwise. The record is ready for MethodStore::add_titer (refused
/// titers are stored too, so that the history shows them).
store::TiterRecord judge_titer(const store::TitrantRecord& titrant,
                               const std::vector<double>& determinations_mol_per_l,
                               TimePoint determined_at, const TiterOptions& options = {});

/// judge_titer() and store it; the stored record (accepted or not) is returned.
Result<store::TiterRecord> record_titer(store::MethodStore& store, const std::string& titrant,
                                        const std::vector<double>& determinations_mol_per_l,
                                        TimePoint determined_at, const TiterOptions& options = {});

/// True if `titer` is accepted, determined at or before `t`, and `t` is before
/// its expiry.
bool titer_valid_at(const store::TiterRecord& titer, TimePoint t);

/// The latest accepted titer of `titrant` (and its `lot`, if not empty)
/// determined at or before `t`, valid or expired; none if there is none.
std::optional<store::TiterRecord> latest_accepted_titer(
    const std::vector<store::TiterRecord>& titers, const std::string& titrant,
    const std::string& lot, TimePoint t);

/// True if `calibration` is accepted, measured at or before `t`, and `t` is
/// before its expiry.
bool calibration_valid_at(const store::CalibrationRecord& calibration, TimePoint t);

/// The latest accepted calibration of `electrode` measured at or before `t`.
std::optional<store::CalibrationRecord> latest_accepted_calibration(
    const std::vector<store::CalibrationRecord>& calibrations, const std::string& electrode,
    TimePoint t);

}  // namespace veq::method
