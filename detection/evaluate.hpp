// One entry point for callers that choose the method at run time (the
// command line, stored method definitions): method name + options as JSON.
#pragma once

#include <span>
#include <string_view>

#include <nlohmann/json.hpp>

#include "common/result.hpp"
#include "detection/curve.hpp"
#include "detection/endpoint.hpp"

namespace veq::detection {

/// The method names evaluate() knows: "derivative", "segments", "crossing".
std::span<const std::string_view> method_names() noexcept;

/// Evaluates `curve` with the named method. `options` is a JSON object of the
/// method's options (missing fields keep their defaults; see
/// DerivativeOptions, SegmentsOptions, CrossingOptions). Errors (kind
/// invalid_input): an unknown method (the message lists the known ones), an
/// unknown option name, a value of the wrong type or out of range (the
/// message names the option). Finding no endpoint is not an error: the
/// evaluation then holds the flag no_endpoint.
veq::Result<Evaluation> evaluate(const Curve& curve, std::string_view method,
                                 const nlohmann::json& options = nlohmann::json::object());

}  // namespace veq::detection
