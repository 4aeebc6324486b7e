#include "ui/report/report_command.hpp"

#include <cstdio>
#include <filesystem>
#include <memory>
#include <string>

#include "controller/audit/audit.hpp"
#include "controller/store/audit_trail.hpp"
#include "controller/store/sqlite_store.hpp"
#include "ui/report/pdf_report.hpp"
#include "ui/report/report_from_store.hpp"

namespace veq::report {

namespace {

struct ReportCommandOptions {
  std::string db = store::default_database_path();
  std::string key;  // empty: beside the database, or $VEQ_AUDIT_KEY
  std::int64_t run_id = 0;
  std::string series;
  std::string out;
  ReportOptions report;
};

void make_report(const ReportCommandOptions& o) {
  if ((o.run_id > 0) == !o.series.empty())
    throw CLI::ValidationError("--run/--series", "give either --run ID or --series NAME");
  if (!std::filesystem::exists(o.db))
    throw CLI::Error("StoreError", "no store at " + o.db + " (give --db FILE)", 2);
  auto store = store::SqliteStore::open(o.db);
  if (!store)
    throw CLI::Error("StoreError", store.error().message, 2);
  // The audit trail needs its key; without one the report says so and
  // leaves the signature line blank rather than refusing to report.
  const std::string key =
      o.key.empty() ? controller::audit::default_key_path(o.db).string() : o.key;
  std::unique_ptr<store::AuditTrail> trail;
  if (std::filesystem::exists(key)) {
    auto t = store::AuditTrail::open(o.db, key, false);
    if (!t)
      throw CLI::Error("AuditError", t.error().message, 2);
    trail = std::move(t).value();
  }
  ReportSources sources{**store, store->get(), trail.get()};
  if (o.run_id > 0) {
    auto data = run_report_data(sources, o.run_id, o.report);
    if (!data)
      throw CLI::Error("ReportError", data.error().message, 2);
    if (auto w = write_run_report(*data, o.out); !w)
      throw CLI::Error("ReportError", w.error().message, 2);
    std::printf("report of run %lld written to %s\n", static_cast<long long>(o.run_id),
                o.out.c_str());
    return;
  }
  // A series the series runner stored: its entries (blank, titer, check
  // standards told apart); else every run stored under that series name.
  std::int64_t stored_id = 0;
  if (auto all = (*store)->list_series(); all) {
    for (const auto& s : *all)
      if (s.name == o.series)
        stored_id = s.id;  // the latest of that name
  }
  auto data = stored_id > 0 ? stored_series_report_data(sources, **store, stored_id, o.report)
                            : series_report_data(sources, o.series, o.report);
  if (!data)
    throw CLI::Error("ReportError", data.error().message, 2);
  if (auto w = write_series_report(*data, o.out); !w)
    throw CLI::Error("ReportError", w.error().message, 2);
  std::printf("report of series %s (%zu runs, %zu samples) written to %s\n", o.series.c_str(),
              data->runs.size(), data->samples.size(), o.out.c_str());
}

}  // namespace

void add_report_command(CLI::App& app) {
  auto o = std::make_shared<ReportCommandOptions>();
  auto* c = app.add_subcommand(
      "report",
      "Write a PDF report of one run (curve with first derivative and endpoints, method and "
      "version, results, uncertainty budget, titer and calibration, audit summary, signature "
      "line) or of every run of a series (results by sample with replicate statistics, then "
      "each run).");
  c->add_option("--db", o->db, "SQLite file (default ./veq.sqlite or $VEQ_DB)")
      ->capture_default_str();
  c->add_option("--key", o->key,
                "audit key file (default: <db>.audit-key beside the store, or $VEQ_AUDIT_KEY); "
                "without it the report has no audit summary or signature");
  c->add_option("--run", o->run_id, "run number (see veq runs)")->check(CLI::PositiveNumber);
  c->add_option("--series", o->series, "series name: every run stored with it, by sample");
  c->add_option("--out", o->out, "PDF file to write (replaced if it exists)")->required();
  c->add_option("--burette-ml", o->report.burette_nominal_ml,
                "nominal burette volume for the uncertainty budget, mL")
      ->capture_default_str();
  c->add_option("--pipette-tolerance-ml", o->report.pipette_tolerance_ml,
                "tolerance of the sample pipette for the uncertainty budget, mL")
      ->capture_default_str();
  c->callback([o] { make_report(*o); });
}

}  // namespace veq::report
