// What a PDF report shows, as plain data: no Qt, no store. The renderer
// (ui/report/pdf_report.hpp) draws these structs and nothing else, so a
// report can be filled from the store (ui/report/report_from_store.hpp), by
// the series runner, or by hand in a test.
#pragma once

#include <cstdint>
#include <optional>
#include <string>
#include <vector>

#include "common/result.hpp"

namespace veq::report {

/// One line of (x, y) points for a chart, with its axis titles (units in
/// the titles: "titrant added (mL)", "potential (mV)").
struct ChartLine {
  std::string x_title;
  std::string y_title;
  std::vector<double> x;
  std::vector<double> y;
};

/// One endpoint of one evaluation.
struct EndpointRow {
  std::int64_t evaluation_id = 0;
  std::string method;             ///< endpoint method by its detection name ("derivative")
  std::string options;            ///< the method's options, compact JSON
  double volume_ml = 0.0;         ///< mL
  double uncertainty_ml = 0.0;    ///< standard uncertainty, mL
  double signal = 0.0;            ///< in the run's signal unit
  std::string flags;              ///< quality flags of the evaluation and the endpoint
  bool used_for_results = false;  ///< the evaluation the results come from
};

/// One reported result.
struct ResultRow {
  std::string name;  ///< "metal_concentration"
  double value = 0.0;
  std::string unit;   ///< "mmol/L"
  std::string flags;  ///< empty when the result carries no warning
};

/// One row of an uncertainty budget (JCGM 100:2008, product and quotient).
struct BudgetRow {
  std::string name;  ///< "titrant concentration"
  double value = 0.0;
  std::string unit;
  double standard_uncertainty = 0.0;  ///< in `unit`
  double relative_percent = 0.0;      ///< u / value, %
  double share_percent = 0.0;         ///< share of the combined variance, %
  std::string basis;                  ///< how u was evaluated
};

/// A budget for one result.
struct UncertaintyReport {
  std::string result_name;
  std::string unit;
  double value = 0.0;
  std::vector<BudgetRow> rows;
  double combined_standard = 0.0;  ///< in `unit`
  double coverage_factor = 2.0;
  double expanded = 0.0;  ///< in `unit`
  std::string note;       ///< assumptions behind the rows
};

/// The reviewer's signature; empty fields draw a blank line to sign on paper.
struct Signature {
  bool signed_off = false;
  std::string reviewer;
  std::string meaning;     ///< "reviewed and approved"
  std::string signed_utc;  ///< ISO 8601 UTC
};

/// Everything a one-run report shows.
struct RunReportData {
  std::int64_t run_id = 0;
  std::string sample_id;
  std::string series;
  std::string status;  ///< "completed", "failed"...
  std::string end_reason;
  std::string started_utc;   ///< ISO 8601 UTC
  std::string finished_utc;  ///< ISO 8601 UTC
  std::string method_name;
  std::string method_version;  ///< "3", or words saying why it is unknown
  std::string titrant_name;
  double titrant_conc_mol_per_l = 0.0;  ///< as used for the results, mol/L
  std::string titer;                    ///< the titer behind that concentration, in words
  std::string calibration;              ///< the electrode calibration in force, in words
  double sample_volume_ml = 0.0;
  std::string burette;
  std::string sensor;
  std::string software_version;  ///< veq version that measured the run
  ChartLine curve;               ///< signal against volume, as measured
  ChartLine derivative;          ///< first derivative; empty when too few points
  std::vector<EndpointRow> endpoints;
  std::vector<ResultRow> results;
  std::optional<UncertaintyReport> uncertainty;
  std::vector<std::string> history;  ///< state transitions, one line each
  std::vector<std::string> audit;    ///< audit trail summary, one line each
  std::vector<std::string> notes;    ///< what is missing and why
  Signature signature;
  std::string generated_utc;    ///< when the report was made, ISO 8601 UTC
  std::string report_software;  ///< veq version that made the report
};

/// Replicates of one sample in a series, with their statistics.
struct ReplicateRow {
  std::string sample_id;
  std::string kind = "sample";  ///< "sample", "check standard", "blank", "titer"...
  std::string result_name;      ///< which result the values are
  std::string unit;
  std::vector<std::int64_t> run_ids;  ///< one per value
  std::vector<double> values;         ///< in `unit`
  double mean = 0.0;
  double sd = 0.0;  ///< sample standard deviation (n - 1); 0 for one value
  double rsd_percent = 0.0;
  std::string outlier;  ///< Grubbs verdict (ISO 5725-2) for 3+ values, else empty
  std::string flags;    ///< warnings of the values, joined
};

/// Fills the statistics of a row from its values with
/// controller::replicate_statistics. Errors: no values, a value not finite
/// (with its position), run_ids and values of different lengths.
veq::Result<ReplicateRow> make_replicate_row(std::string sample_id, std::string kind,
                                             std::string result_name, std::string unit,
                                             std::vector<std::int64_t> run_ids,
                                             std::vector<double> values, std::string flags = {});

/// A check standard: a sample of known content measured with the series.
struct CheckStandardRow {
  std::string sample_id;
  std::int64_t run_id = 0;
  std::string unit;
  double expected = 0.0;           ///< in `unit`
  double found = 0.0;              ///< in `unit`
  double recovery_percent = 0.0;   ///< found / expected, %
  double tolerance_percent = 0.0;  ///< accepted deviation of the recovery from 100 %, %
  bool within = false;
};

/// Fills recovery and verdict. Error when `expected` is zero or either value is not finite.
veq::Result<CheckStandardRow> make_check_standard_row(std::string sample_id, std::int64_t run_id,
                                                      std::string unit, double expected,
                                                      double found, double tolerance_percent);

/// Everything a series report shows: a summary page, then each run's pages.
struct SeriesReportData {
  std::string series_name;
  std::string method_name;
  std::string method_version;
  std::string titrant_name;
  double titrant_conc_mol_per_l = 0.0;  ///< as used, mol/L
  std::string titer;                    ///< in words, as in RunReportData
  std::string blank;                    ///< the blank used, in words ("0.012 mL, run 4"), or "none"
  std::string started_utc;
  std::string finished_utc;
  std::vector<ReplicateRow> samples;
  std::vector<CheckStandardRow> check_standards;
  std::vector<std::string> flagged;  ///< results with a warning, one line each
  std::vector<std::string> notes;
  Signature signature;
  std::vector<RunReportData> runs;  ///< one set of pages each, in this order
  std::string generated_utc;
  std::string report_software;
};

}  // namespace veq::report
