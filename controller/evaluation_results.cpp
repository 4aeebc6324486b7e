#include "controller/evaluation_results.hpp"

#include <algorithm>
#include <cmath>
#include <cstdlib>
#include <string>

#include <nlohmann/json.hpp>

namespace veq::controller {

namespace {

constexpr const char* kEndpointVolume = "endpoint_volume";

/// The endpoints a run expected (TitrationMethod::endpoint_count in the
/// settings it stored; 1 when they do not say).
int expected_endpoints(const std::string& method_json) {
  const auto j = nlohmann::json::parse(method_json, nullptr, false);
  if (j.is_object() && j.contains("endpoint_count") && j.at("endpoint_count").is_number_integer())
    return std::max(1, j.at("endpoint_count").get<int>());
  return 1;
}

}  // namespace

Result<std::vector<store::ResultRecord>> add_results_for_evaluation(store::RunStore& store,
                                                                    std::int64_t run_id,
                                                                    std::int64_t evaluation_id) {
  const std::string run_name = "run " + std::to_string(run_id);
  auto results = store.load_results(run_id);
  if (!results)
    return results.error();
  std::vector<store::ResultRecord> existing;
  for (const auto& r : *results)
    if (r.evaluation_id == evaluation_id)
      existing.push_back(r);
  if (!existing.empty())
    return existing;

  auto evaluations = store.load_evaluations(run_id);
  if (!evaluations)
    return evaluations.error();
  const store::EvaluationRecord* chosen = nullptr;
  for (const auto& e : *evaluations)
    if (e.id == evaluation_id)
      chosen = &e;
  if (!chosen) {
    return make_error(ErrorKind::invalid_input, "evaluation " + std::to_string(evaluation_id) +
                                                    " is not an evaluation of " + run_name);
  }
  if (chosen->endpoints.empty() || !std::isfinite(chosen->endpoints.front().volume_ml)) {
    return make_error(ErrorKind::invalid_input,
                      "evaluation " + std::to_string(evaluation_id) + " of " + run_name +
                          " found no endpoint; no result can be computed from it");
  }
  // The run's own rule (controller/titration.cpp): the steepest breaks, as
  // many as the run expected, in volume order; the first gives the result.
  auto run = store.load_run(run_id);
  if (!run)
    return run.error();
  const auto expected = static_cast<std::size_t>(expected_endpoints(run->run.method_json));
  if (chosen->endpoints.size() < expected) {
    return make_error(ErrorKind::invalid_input,
                      "evaluation " + std::to_string(evaluation_id) + " of " + run_name +
                          " found " + std::to_string(chosen->endpoints.size()) + " of the " +
                          std::to_string(expected) + " endpoints the run expects");
  }
  std::vector<store::EndpointRecord> breaks = chosen->endpoints;
  std::stable_sort(breaks.begin(), breaks.end(),
                   [](const auto& a, const auto& b) { return a.steepness > b.steepness; });
  breaks.resize(expected);
  std::sort(breaks.begin(), breaks.end(),
            [](const auto& a, const auto& b) { return a.volume_ml < b.volume_ml; });
  const double new_endpoint_ml = breaks.front().volume_ml;

  // The results the run was stored with: those of the earliest evaluation
  // that has an endpoint volume among its results.
  std::int64_t first = 0;
  double first_endpoint_ml = 0.0;
  for (const auto& r : *results) {
    if (r.name == kEndpointVolume && (first == 0 || r.evaluation_id < first)) {
      first = r.evaluation_id;
      first_endpoint_ml = r.value;
    }
  }
  if (first == 0 || !(first_endpoint_ml > 0.0)) {
    return make_error(ErrorKind::invalid_input,
                      run_name +
                          " has no results to compute from (it ended without an endpoint); "
                          "evaluate it and compute its results afresh");
  }
  std::vector<store::ResultRecord> added;
  for (const auto& r : *results) {
    if (r.evaluation_id != first)
      continue;
    store::ResultRecord next = r;
    next.id = 0;
    next.evaluation_id = evaluation_id;
    if (r.name == kEndpointVolume) {
      next.value = new_endpoint_ml;
    } else if (r.name.rfind(kEndpointVolume + std::string("_"), 0) == 0) {
      // endpoint_volume_2, ...: the later endpoints of a curve with several.
      const auto k =
          std::strtoul(r.name.c_str() + std::string(kEndpointVolume).size() + 1, nullptr, 10);
      if (k < 2 || k > breaks.size())
        return make_error(ErrorKind::invalid_input,
                          run_name + " has a result '" + r.name + "' that none of the " +
                              std::to_string(breaks.size()) + " endpoints it expects gives");
      next.value = breaks[k - 1].volume_ml;
    } else {
      next.value = r.value * (new_endpoint_ml / first_endpoint_ml);
    }
    auto id = store.add_result(next);
    if (!id)
      return id.error();
    next.id = *id;
    added.push_back(next);
  }
  return added;
}

std::vector<EvaluationUsed> evaluations_used(const std::string& determination_detail_json) {
  std::vector<EvaluationUsed> out;
  const auto detail = nlohmann::json::parse(determination_detail_json, nullptr, false);
  if (!detail.is_object() || !detail.contains("traceability"))
    return out;
  const auto& trace = detail.at("traceability");
  if (!trace.is_object() || !trace.contains("evaluations") || !trace.at("evaluations").is_array())
    return out;
  for (const auto& e : trace.at("evaluations")) {
    if (!e.is_object() || !e.contains("run") || !e.contains("evaluation") ||
        !e.at("run").is_number_integer() || !e.at("evaluation").is_number_integer())
      continue;
    const EvaluationUsed used{e.at("run").get<std::int64_t>(),
                              e.at("evaluation").get<std::int64_t>()};
    if (used.run_id > 0)
      out.push_back(used);
  }
  return out;
}

}  // namespace veq::controller
