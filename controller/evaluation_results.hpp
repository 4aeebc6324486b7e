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

/// A run and the evaluation of it that a stored value rests on.
struct EvaluationUsed {
  std::int64_t run_id = 0;
  std::int64_t evaluation_id = 0;
  bool operator==(const EvaluationUsed&) const = default;
};

/// The evaluations a series determination rests on, one per titration run,
/// from its detail (`traceability.evaluations`, written by the series
/// runner). Empty for a detail without them (written before they were
/// kept) or one that is not JSON. A series' values are computed once, when
/// the series runs: a reviewer who later chooses another evaluation of one
/// of these runs gets that run's results anew (add_results_for_evaluation),
/// while the series' values stay as they were and are shown as resting on
/// the evaluation that is no longer in use.
std::vector<EvaluationUsed> evaluations_used(const std::string& determination_detail_json);

}  // namespace veq::controller
