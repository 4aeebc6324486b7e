// One entry point for callers that choose the method at run time (the
// command line, stored method definitions, detection trials): method name +
// options as JSON.
#pragma once

#include <span>
#include <string_view>

#include <nlohmann/json.hpp>

#include "chemistry/constants.hpp"
#include "common/result.hpp"
#include "detection/curve.hpp"
#include "detection/endpoint.hpp"

namespace veq::detection {

/// The method names evaluate() knows: "derivative", "segments", "crossing",
/// "gran", "model".
std::span<const std::string_view> method_names() noexcept;

/// Evaluates `curve` with the named method. `options` is a JSON object of the
/// method's options (missing fields keep their defaults; see
/// DerivativeOptions, SegmentsOptions, CrossingOptions, GranOptions,
/// ModelFitOptions); the sample chemistry of "gran" and "model" is their
/// option "sample", a sample document in the format of `veq predict`.
/// Errors (kind invalid_input): an unknown method (the message lists the
/// known ones), an unknown option name, a value of the wrong type or out of
/// range (the message names the option), a sample the constants library
/// cannot build. Finding no endpoint is not an error: the evaluation then
/// holds the flag no_endpoint.
veq::Result<Evaluation> evaluate(const Curve& curve, std::string_view method,
                                 const nlohmann::json& options = nlohmann::json::object());

/// The same with a given constants library (for "gran" and "model"; the
/// other methods ignore it). The overload above parses the library shipped
/// with veq on each call that needs it; callers that evaluate many curves
/// parse it once and use this one.
veq::Result<Evaluation> evaluate(const Curve& curve, std::string_view method,
                                 const nlohmann::json& options,
                                 const chemistry::ConstantsLibrary& library);

}  // namespace veq::detection
