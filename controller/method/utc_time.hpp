// Instants as the store writes them: ISO 8601 UTC text with milliseconds
// ("2026-12-02T01:48:22.123Z"), and back.
#pragma once

#include <chrono>
#include <string>

#include "common/result.hpp"

namespace veq::method {

using TimePoint = std::chrono::sys_time<std::chrono::milliseconds>;

/// "2026-12-02T01:48:22.123Z".
std::string format_utc(TimePoint t);
/// Reads "YYYY-MM-DDTHH:MM:SSZ" with optional ".fff" milliseconds; anything
/// else is an error naming the text.
Result<TimePoint> parse_utc(const std::string& text);

}  // namespace veq::method
