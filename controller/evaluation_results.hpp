// A run's results from another of its evaluations: when a reviewer chooses
// the evaluation a run's results use, the results of that evaluation are
// added as new records (nothing stored is changed).
#pragma once

#include <cstdint>
#include <vector>

#include "common/result.hpp"
#include "controller/store/run_store.hpp"

namespace veq::controller {

/// Adds the results of run `run_id` computed from its evaluation
/// `evaluation_id`, and returns them. The endpoint is chosen as the run
/// chose it: the largest break, or with a run that expected several
/// (TitrationMethod::endpoint_count in its stored settings) the steepest
/// that many in volume order, the first giving the result and the others
/// the later endpoint volumes (endpoint_volume_2...). It returns the stored ones and
/// adds nothing if that evaluation already has results. Every result a run
/// stores is proportional to its endpoint volume (amount = V c v, the
/// concentrations = amount / sample volume, and mg/L = mmol/L times the molar
/// mass: compute_metal_result in controller/titration.hpp), so each new value
/// is the first evaluation's value times V_new / V_first, and the endpoint
/// volume is V_new. Errors: the evaluation is not the run's, it found no
/// endpoint or fewer than the run expects, or the run has no results to
/// start from (it ended without an endpoint).
Result<std::vector<store::ResultRecord>> add_results_for_evaluation(store::RunStore& store,
                                                                    std::int64_t run_id,
                                                                    std::int64_t evaluation_id);

}  // namespace veq::controller
