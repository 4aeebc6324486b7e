#include "controller/method/readiness.hpp"

#include <algorithm>

#include "controller/method/titer.hpp"

namespace veq::method {

Result<Readiness> check_ready(const Method& method,
                              const std::vector<store::TitrantRecord>& titrants,
                              const std::vector<store::TiterRecord>& titers,
                              const std::vector<store::CalibrationRecord>& calibrations,
                              TimePoint now) {
  Readiness ready;
  std::vector<std::string> problems;
  for (const auto& use : method.titrants) {
    auto t = std::find_if(titrants.begin(), titrants.end(),
                          [&](const store::TitrantRecord& r) { return r.name == use.name; });
    if (t == titrants.end()) {
      problems.push_back("titrant '" + use.name + "' is not registered");
      continue;
    }
    auto titer = latest_accepted_titer(titers, use.name, t->lot, now);
    if (!titer) {
      problems.push_back("titrant '" + use.name + "' (lot '" + t->lot +
                         "') has no accepted titer; determine its titer first");
      continue;
    }
    if (!titer_valid_at(*titer, now)) {
      problems.push_back("titer of '" + use.name + "' expired at " + titer->expires_utc +
                         " (determined " + titer->determined_utc + "); determine it again");
      continue;
    }
    ready.titers.push_back(Readiness::Titer{use.name, use.burette, titer->conc_mol_per_l, titer->id,
                                            titer->expires_utc});
  }
  if (method.indication.needs_calibration) {
    const std::string& name = method.indication.name;
    auto c = latest_accepted_calibration(calibrations, name, now);
    if (!c) {
      problems.push_back(std::string(indication_kind_name(method.indication.kind)) + " '" + name +
                         "' has no accepted calibration; calibrate it first");
    } else if (!calibration_valid_at(*c, now)) {
      problems.push_back("calibration of " +
                         std::string(indication_kind_name(method.indication.kind)) + " '" + name +
                         "' expired at " + c->expires_utc + " (measured " + c->measured_utc +
                         "); calibrate it again");
    } else {
      ready.calibration = *c;
    }
  }
  if (!problems.empty()) {
    std::string message = "method '" + method.name + "' version " + std::to_string(method.version) +
                          " cannot run at " + format_utc(now) + ": ";
    for (std::size_t i = 0; i < problems.size(); ++i)
      message += (i ? "; " : "") + problems[i];
    return make_error(ErrorKind::invalid_input, message);
  }
  return ready;
}

Result<Readiness> check_ready(const Method& method, store::MethodStore& store, TimePoint now) {
  std::vector<store::TitrantRecord> titrants;
  std::vector<store::TiterRecord> titers;
  for (const auto& use : method.titrants) {
    auto t = store.load_titrant(use.name);
    if (!t) {
      if (t.error().kind == ErrorKind::not_found)
        continue;  // reported by the check below with the other problems
      return t.error();
    }
    titrants.push_back(*t);
    auto history = store.titer_history(use.name);
    if (!history)
      return history.error();
    titers.insert(titers.end(), history->begin(), history->end());
  }
  std::vector<store::CalibrationRecord> calibrations;
  if (method.indication.needs_calibration) {
    auto history = store.calibration_history(method.indication.name);
    if (!history)
      return history.error();
    calibrations = std::move(*history);
  }
  return check_ready(method, titrants, titers, calibrations, now);
}

}  // namespace veq::method
