// Before a run: does every titrant of a method have a valid titer, and its
// electrode a valid calibration? A method refuses an expired one.
#pragma once

#include <optional>
#include <string>
#include <vector>

#include "common/result.hpp"
#include "controller/method/method.hpp"
#include "controller/method/utc_time.hpp"
#include "controller/store/method_store.hpp"

namespace veq::method {

/// What a run of the method uses, once check_ready() has passed.
struct Readiness {
  struct Titer {
    std::string titrant;
    std::string burette;
    double conc_mol_per_l = 0.0;  ///< the accepted titer, mol/L: use it, not the nominal value
    std::int64_t titer_id = 0;
    std::string expires_utc;
  };
  std::vector<Titer> titers;  ///< in the order of Method::titrants
  /// The calibration in force, if the method needs one.
  std::optional<store::CalibrationRecord> calibration;
};

/// Checks at `now` that every titrant of `method` is known, has an accepted
/// titer for its current lot that has not expired, and that the indication
/// has an accepted, unexpired calibration if the method needs one. The error
/// (invalid_input) lists every problem, each naming the titrant or electrode
/// and, for an expired record, since when ("titer of 'EDTA 0.01 mol/L' expired
/// at 2026-11-30T08:00:00.000Z").
Result<Readiness> check_ready(const Method& method,
                              const std::vector<store::TitrantRecord>& titrants,
                              const std::vector<store::TiterRecord>& titers,
                              const std::vector<store::CalibrationRecord>& calibrations,
                              TimePoint now);

/// The same, reading titrants, titers and calibrations from a store.
Result<Readiness> check_ready(const Method& method, store::MethodStore& store, TimePoint now);

}  // namespace veq::method
