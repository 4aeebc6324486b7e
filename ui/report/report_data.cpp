#include "ui/report/report_data.hpp"

#include <cmath>
#include <utility>

#include "controller/results.hpp"

namespace veq::report {

veq::Result<ReplicateRow> make_replicate_row(std::string sample_id, std::string kind,
                                             std::string result_name, std::string unit,
                                             std::vector<std::int64_t> run_ids,
                                             std::vector<double> values, std::string flags) {
  if (run_ids.size() != values.size()) {
    return make_error(ErrorKind::invalid_input,
                      "sample " + sample_id + ": " + std::to_string(run_ids.size()) +
                          " run ids for " + std::to_string(values.size()) + " values");
  }
  auto stats = controller::replicate_statistics(values);
  if (!stats)
    return make_error(stats.error().kind, "sample " + sample_id + ": " + stats.error().message);
  ReplicateRow row;
  row.sample_id = std::move(sample_id);
  row.kind = std::move(kind);
  row.result_name = std::move(result_name);
  row.unit = std::move(unit);
  row.run_ids = std::move(run_ids);
  row.values = std::move(values);
  row.mean = stats->mean;
  row.sd = stats->sd;
  row.rsd_percent = stats->rsd_percent;
  if (stats->outlier && stats->outlier->verdict != "none") {
    row.outlier = stats->outlier->verdict + ": run " +
                  std::to_string(row.run_ids[stats->outlier->suspect_index]);
  } else if (stats->outlier) {
    row.outlier = "none";
  }
  row.flags = std::move(flags);
  return row;
}

veq::Result<CheckStandardRow> make_check_standard_row(std::string sample_id, std::int64_t run_id,
                                                      std::string unit, double expected,
                                                      double found, double tolerance_percent) {
  if (!std::isfinite(expected) || expected == 0.0 || !std::isfinite(found) ||
      !std::isfinite(tolerance_percent) || tolerance_percent < 0.0) {
    return make_error(ErrorKind::invalid_input,
                      "check standard " + sample_id +
                          ": expected must be a non-zero number, found and tolerance numbers");
  }
  CheckStandardRow row;
  row.sample_id = std::move(sample_id);
  row.run_id = run_id;
  row.unit = std::move(unit);
  row.expected = expected;
  row.found = found;
  row.recovery_percent = 100.0 * found / expected;
  row.tolerance_percent = tolerance_percent;
  row.within = std::abs(row.recovery_percent - 100.0) <= tolerance_percent;
  return row;
}

}  // namespace veq::report
