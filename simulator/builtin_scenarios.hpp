// Scenario files compiled into veq, so the demo runs without any file at hand.
#pragma once

#include <string_view>
#include <vector>

namespace veq::simulator {

/// Text of a built-in scenario ("demo_calcium"), or empty if there is none.
std::string_view builtin_scenario(std::string_view name);
/// Names of the built-in scenarios.
std::vector<std::string_view> builtin_scenario_names();

}  // namespace veq::simulator
