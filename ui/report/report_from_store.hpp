// Fills the report's plain data from the store, through the controller's
// public interfaces only (RunStore, MethodStore, AuditTrail). No Qt.
#pragma once

#include <cstdint>
#include <string>

#include "common/result.hpp"
#include "controller/store/audit_trail.hpp"
#include "controller/store/method_store.hpp"
#include "controller/store/run_store.hpp"
#include "controller/store/series_store.hpp"
#include "ui/report/report_data.hpp"

namespace veq::report {

/// Assumptions of the uncertainty budget for what the store does not record.
struct ReportOptions {
  /// Nominal volume of the burette's cylinder, mL: selects the ISO 8655-3
  /// limit of its systematic error (20 mL: the simulator's cylinder and a
  /// common size for metal titrations; set it per instrument).
  double burette_nominal_ml = 20.0;
  /// Tolerance ±a of the pipette that measured the aliquot, mL, taken as a
  /// rectangular distribution (0.02 mL: a class A 10 mL volumetric pipette,
  /// ISO 648, recalled from memory).
  double pipette_tolerance_ml = 0.02;
  /// Relative standard uncertainty of the titrant's concentration when the
  /// store holds no accepted titer for it, % (0.2 %: a titrant standardised
  /// against a primary standard, common practice).
  double titrant_relative_percent_without_titer = 0.2;
  /// The stored result the budget is made for: the run's metal
  /// concentration, the number a lab reports.
  std::string budget_result = "metal_concentration";
  /// The result a series report summarises per sample.
  std::string series_result = "metal_concentration";
};

/// Where the report reads from. `methods` and `audit` may be null: the
/// report then says that the method version, titer, calibration or audit
/// trail could not be read, and leaves the signature line blank.
struct ReportSources {
  store::RunStore& runs;
  store::MethodStore* methods = nullptr;
  store::AuditTrail* audit = nullptr;
};

/// One run's report data. The curve, its first derivative and the endpoint
/// markers are those of the run view (ui/run_plot.hpp), so paper and screen
/// agree. The method version is the latest version of the run's method that
/// a run has used and that was stored before this run started (the store's
/// interface does not link a run to its version; docs/reports.md). Error
/// not_found naming the run when it does not exist.
veq::Result<RunReportData> run_report_data(const ReportSources& sources, std::int64_t run_id,
                                           const ReportOptions& options = {});

/// A series report of every run whose series name is `series`, grouped by
/// sample id in the order of their first run, with the replicate statistics
/// of `options.series_result`. Error not_found when no run has that series.
veq::Result<SeriesReportData> series_report_data(const ReportSources& sources,
                                                 const std::string& series,
                                                 const ReportOptions& options = {});

/// A series report from a series the series runner stored (SeriesStore):
/// every sample, blank, titer and check-standard entry with its counted
/// values and statistics, the check standards against their expected
/// values, every flagged entry and its notes, and each titration's pages.
/// Error not_found when the store holds no such series.
veq::Result<SeriesReportData> stored_series_report_data(const ReportSources& sources,
                                                        store::SeriesStore& series,
                                                        std::int64_t series_id,
                                                        const ReportOptions& options = {});

}  // namespace veq::report
