#include "controller/evaluation_results.hpp"

#include <cmath>
#include <string>

namespace veq::controller {

namespace {

constexpr const char* kEndpointVolume = "endpoint_volume";

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
  const double new_endpoint_ml = chosen->endpoints.front().volume_ml;

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
    next.value = r.name == kEndpointVolume ? new_endpoint_ml
                                           : r.value * (new_endpoint_ml / first_endpoint_ml);
    auto id = store.add_result(next);
    if (!id)
      return id.error();
    next.id = *id;
    added.push_back(next);
  }
  return added;
}

}  // namespace veq::controller
