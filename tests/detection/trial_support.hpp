// Shared by the Gran, model-fit and trials tests: the constants library,
// the 50 seeded curves of each built-in trial scenario and each method's
// outcomes on them, each made once per test program (the general solver is
// the slow part, several times slower still under AddressSanitizer).
#pragma once

#include <cstdint>
#include <map>
#include <string>
#include <vector>

#include <nlohmann/json.hpp>

#include "chemistry/constants.hpp"
#include "detection/trials.hpp"

namespace veq::detection::testing {

inline const chemistry::ConstantsLibrary& library() {
  static const chemistry::ConstantsLibrary lib = chemistry::builtin_constants_library().value();
  return lib;
}

/// Seeds 1..50 of a built-in scenario.
inline const std::vector<TrialCurve>& trial_curves(const std::string& name) {
  static std::map<std::string, std::vector<TrialCurve>> cache;
  auto it = cache.find(name);
  if (it != cache.end())
    return it->second;
  const auto scenario = builtin_trial_scenario(name).value();
  std::vector<TrialCurve> made;
  for (std::uint64_t seed = 1; seed <= 50; ++seed)
    made.push_back(simulate_trial_curve(scenario, seed, library()).value());
  return cache.emplace(name, std::move(made)).first->second;
}

/// A method with options (the scenario's sample added for gran and model)
/// on those 50 curves.
inline const std::vector<TrialOutcome>& trial_outcomes(const std::string& name,
                                                       const std::string& method,
                                                       const nlohmann::json& options) {
  static std::map<std::string, std::vector<TrialOutcome>> cache;
  const std::string key = name + "|" + method + "|" + options.dump();
  auto it = cache.find(key);
  if (it != cache.end())
    return it->second;
  const auto scenario = builtin_trial_scenario(name).value();
  TrialMethod m{method, method, options};
  return cache.emplace(key, run_trials(trial_curves(name), m, scenario.sample, library()))
      .first->second;
}

}  // namespace veq::detection::testing
