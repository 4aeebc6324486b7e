#include "detection/evaluate.hpp"

#include <array>
#include <string>

#include "detection/crossing.hpp"
#include "detection/derivative.hpp"
#include "detection/gran.hpp"
#include "detection/model_fit.hpp"
#include "detection/segments.hpp"

namespace veq::detection {

namespace {
constexpr std::array<std::string_view, 5> kMethodNames = {"derivative", "segments", "crossing",
                                                          "gran", "model"};

bool uses_chemistry(std::string_view method, const nlohmann::json& options) {
  return (method == "gran" || method == "model") && options.is_object() &&
         options.contains("sample");
}

veq::Result<Evaluation> dispatch(const Curve& curve, std::string_view method,
                                 const nlohmann::json& options,
                                 const chemistry::ConstantsLibrary* library) {
  // A missing options object (JSON null) means "all defaults".
  const nlohmann::json empty = nlohmann::json::object();
  const nlohmann::json& o = options.is_null() ? empty : options;
  if (method == "derivative") {
    auto parsed = derivative_options_from_json(o);
    if (!parsed)
      return parsed.error();
    return find_endpoints_by_derivative(curve, *parsed);
  }
  if (method == "segments") {
    auto parsed = segments_options_from_json(o);
    if (!parsed)
      return parsed.error();
    return find_endpoints_by_segments(curve, *parsed);
  }
  if (method == "crossing") {
    auto parsed = crossing_options_from_json(o);
    if (!parsed)
      return parsed.error();
    return find_endpoints_by_crossing(curve, *parsed);
  }
  if (method == "gran") {
    auto parsed = gran_options_from_json(o);
    if (!parsed)
      return parsed.error();
    return library ? find_endpoints_by_gran(curve, *parsed, *library)
                   : find_endpoints_by_gran(curve, *parsed);
  }
  if (method == "model") {
    auto parsed = model_fit_options_from_json(o);
    if (!parsed)
      return parsed.error();
    return library ? fit_titration_model(curve, *parsed, *library)
                   : fit_titration_model(curve, *parsed);
  }
  std::string known;
  for (std::string_view name : kMethodNames) {
    if (!known.empty())
      known += ", ";
    known += name;
  }
  return veq::make_error(veq::ErrorKind::invalid_input,
                         "unknown endpoint method '" + std::string(method) + "'; known: " + known);
}

}  // namespace

std::span<const std::string_view> method_names() noexcept {
  return kMethodNames;
}

veq::Result<Evaluation> evaluate(const Curve& curve, std::string_view method,
                                 const nlohmann::json& options) {
  if (uses_chemistry(method, options)) {
    auto library = chemistry::builtin_constants_library();
    if (!library)
      return library.error();
    return dispatch(curve, method, options, &*library);
  }
  return dispatch(curve, method, options, nullptr);
}

veq::Result<Evaluation> evaluate(const Curve& curve, std::string_view method,
                                 const nlohmann::json& options,
                                 const chemistry::ConstantsLibrary& library) {
  return dispatch(curve, method, options, &library);
}

}  // namespace veq::detection
