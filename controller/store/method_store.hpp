// What the controller needs from a store of methods and their versions,
// titrants with their titer history, and electrode calibrations. Like
// RunStore, an interface: the controller never sees SQL.
//
// Methods are kept as the text of their method file (controller/method), so
// that the store does not depend on the method model and an old version reads
// back exactly as it was written.
#pragma once

#include <cstdint>
#include <string>
#include <vector>

#include "common/result.hpp"

namespace veq::store {

/// One version of a method as stored.
struct MethodVersionRecord {
  std::string name;
  int version = 0;          ///< 1, 2, 3... per method name
  std::string text;         ///< the method file, as written by controller/method
  std::string created_utc;  ///< ISO 8601, UTC
  bool used = false;        ///< a run has used it: it can no longer change
};

/// A titrant solution as the lab made it.
struct TitrantRecord {
  std::string name;                     ///< unique, as methods name it ("EDTA 0.01 mol/L")
  double nominal_conc_mol_per_l = 0.0;  ///< concentration it was made up to, mol/L
  std::string lot;                      ///< lot or batch of the solution
  std::string prepared_utc;             ///< preparation date, ISO 8601 UTC
};

/// One titer determination of a titrant: the mean of its individual
/// determinations, whether it was accepted, and until when it holds.
struct TiterRecord {
  std::int64_t id = 0;                           ///< filled in by the store
  std::string titrant;                           ///< titrant name
  std::string lot;                               ///< the titrant's lot when determined
  double conc_mol_per_l = 0.0;                   ///< determined concentration (mean), mol/L
  std::vector<double> determinations_mol_per_l;  ///< the individual values, mol/L
  double rsd_percent = 0.0;  ///< relative standard deviation of the determinations, %
  bool accepted = false;
  std::string determined_utc;  ///< ISO 8601 UTC
  std::string expires_utc;     ///< ISO 8601 UTC; meaningless if not accepted
  std::string note;            ///< why refused, or the standard used
};

/// An electrode calibration as computed elsewhere (controller lab checks);
/// the store keeps the record only.
struct CalibrationRecord {
  std::int64_t id = 0;               ///< filled in by the store
  std::string electrode;             ///< electrode or photometer name, as methods name it
  double slope_mv_per_decade = 0.0;  ///< mV per decade of activity
  double e0_mv = 0.0;                ///< standard potential, mV
  double temperature_c = 25.0;       ///< °C at which slope and E0 apply
  bool accepted = false;
  std::string measured_utc;  ///< ISO 8601 UTC
  std::string expires_utc;   ///< ISO 8601 UTC
};

class MethodStore {
 public:
  virtual ~MethodStore() = default;

  /// Stores `text` as the next version of method `name` (version 1 for a new
  /// name). If `text` equals the latest version's text, nothing is added and
  /// the latest version is returned: saving an unchanged method is harmless.
  virtual Result<MethodVersionRecord> save_method_version(const std::string& name,
                                                          const std::string& text) = 0;
  /// Rewrites a version that no run has used (a draft being corrected).
  /// Refused (invalid_input) once the version has been used.
  virtual Result<void> replace_method_version(const std::string& name, int version,
                                              const std::string& text) = 0;
  /// One version; version 0 means the latest.
  virtual Result<MethodVersionRecord> load_method_version(const std::string& name,
                                                          int version = 0) = 0;
  /// Every version of a method, oldest first.
  virtual Result<std::vector<MethodVersionRecord>> list_method_versions(
      const std::string& name) = 0;
  /// Names of all stored methods, sorted.
  virtual Result<std::vector<std::string>> list_method_names() = 0;
  /// Records that run `run_id` used this method version; from then on the
  /// version cannot change (also enforced by triggers in the database).
  virtual Result<void> record_method_use(std::int64_t run_id, const std::string& name,
                                         int version) = 0;

  /// Adds a titrant or updates its concentration, lot and preparation date.
  virtual Result<void> save_titrant(const TitrantRecord& titrant) = 0;
  virtual Result<TitrantRecord> load_titrant(const std::string& name) = 0;
  virtual Result<std::vector<TitrantRecord>> list_titrants() = 0;
  /// Appends a titer determination (never changed afterwards). Refuses an
  /// accepted titer from fewer than three determinations.
  virtual Result<std::int64_t> add_titer(const TiterRecord& titer) = 0;
  /// Every titer of a titrant, oldest first.
  virtual Result<std::vector<TiterRecord>> titer_history(const std::string& titrant) = 0;

  /// Appends a calibration record (never changed afterwards).
  virtual Result<std::int64_t> add_calibration(const CalibrationRecord& calibration) = 0;
  /// Every calibration of an electrode, oldest first.
  virtual Result<std::vector<CalibrationRecord>> calibration_history(
      const std::string& electrode) = 0;
};

}  // namespace veq::store
