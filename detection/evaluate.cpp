#include "detection/evaluate.hpp"

#include <array>
#include <string>

#include "detection/crossing.hpp"
#include "detection/derivative.hpp"
#include "detection/segments.hpp"

namespace veq::detection {

namespace {
constexpr std::array<std::string_view, 3> kMethodNames = {"derivative", "segments", "crossing"};
}  // namespace

std::span<const std::string_view> method_names() noexcept {
  return kMethodNames;
}

veq::Result<Evaluation> evaluate(const Curve& curve, std::string_view method,
                                 const nlohmann::json& options) {
  // A missing options object (JSON null) means "all defaults".
  const nlohmann::json& given = options;
  const nlohmann::json empty = nlohmann::json::object();
  const nlohmann::json& o = given.is_null() ? empty : given;
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
  std::string known;
  for (std::string_view name : kMethodNames) {
    if (!known.empty())
      known += ", ";
    known += name;
  }
  return veq::make_error(veq::ErrorKind::invalid_input,
                         "unknown endpoint method '" + std::string(method) + "'; known: " + known);
}

}  // namespace veq::detection
