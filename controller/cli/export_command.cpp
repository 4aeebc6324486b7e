// `veq export`: runs, points, evaluations and results as CSV or JSON.
#include <cstdio>
#include <filesystem>
#include <memory>
#include <string>

#include "controller/cli/commands.hpp"
#include "controller/cli/run_export.hpp"
#include "controller/store/sqlite_store.hpp"

namespace veq::cli {

namespace {

struct ExportOptions {
  std::string db = store::default_database_path();
  std::int64_t run_id = 0;
  bool all = false;
  std::string format = "json";
  std::string table = "points";
  std::string out;
};

void run_export(const ExportOptions& o) {
  if ((o.run_id > 0) == o.all)
    throw CLI::ValidationError("--run/--all", "give either --run ID or --all");
  auto table = export_table_from_name(o.table);
  if (!table)
    throw CLI::ValidationError("--table", "must be runs, points, evaluations or results");
  // Opening creates a missing file; an export must not leave an empty store behind.
  if (!std::filesystem::exists(o.db))
    throw CLI::Error("StoreError", "no store at " + o.db + " (give --db FILE)", 2);
  auto s = store::SqliteStore::open(o.db);
  if (!s)
    throw CLI::Error("StoreError", s.error().message, 2);
  std::vector<std::int64_t> ids{o.run_id};
  if (o.all) {
    auto all = all_run_ids(**s);
    if (!all)
      throw CLI::Error("StoreError", all.error().message, 2);
    ids = std::move(*all);
  }
  std::string text;
  if (o.format == "csv") {
    auto csv = export_csv(**s, ids, *table);
    if (!csv)
      throw CLI::Error("ExportError", csv.error().message, 2);
    text = std::move(*csv);
  } else {
    auto json = export_json(**s, ids);
    if (!json)
      throw CLI::Error("ExportError", json.error().message, 2);
    text = json->dump(2) + "\n";
  }
  if (auto w = write_text_file(o.out, text); !w)
    throw CLI::Error("ExportError", w.error().message, 2);
  const std::string what = o.format == "csv" ? "csv, " + o.table : o.format;
  std::printf("%zu run%s exported to %s (%s)\n", ids.size(), ids.size() == 1 ? "" : "s",
              o.out.c_str(), what.c_str());
}

}  // namespace

void add_export_command(CLI::App& app) {
  auto o = std::make_shared<ExportOptions>();
  auto* c = app.add_subcommand(
      "export",
      "Write stored runs to a file for other programs: CSV (one table per file, units in the "
      "column names) or JSON (one object per run with its points, evaluations and results).");
  c->add_option("--db", o->db, "SQLite file (default ./veq.sqlite or $VEQ_DB)")
      ->capture_default_str();
  c->add_option("--run", o->run_id, "run number (see veq runs)")->check(CLI::PositiveNumber);
  c->add_flag("--all", o->all, "every run of the store");
  c->add_option("--format", o->format, "csv or json")
      ->check(CLI::IsMember({"csv", "json"}))
      ->capture_default_str();
  c->add_option("--table", o->table, "for CSV: runs, points, evaluations or results")
      ->check(CLI::IsMember({"runs", "points", "evaluations", "results"}))
      ->capture_default_str();
  c->add_option("--out", o->out, "file to write (replaced if it exists)")->required();
  c->callback([o] { run_export(*o); });
}

void add_report_unavailable_command(CLI::App& app) {
  auto* c = app.add_subcommand(
      "report", "PDF report of a run or a series (needs a veq built with Qt 6: VEQ_GUI=ON)");
  c->allow_extras();
  c->callback([] {
    throw CLI::Error("ReportError",
                     "this veq was built without Qt 6 (VEQ_GUI=OFF), which the PDF report needs; "
                     "use veq export for CSV or JSON, or rebuild with -DVEQ_GUI=ON",
                     2);
  });
}

}  // namespace veq::cli
