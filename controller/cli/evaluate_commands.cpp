// `veq import` and `veq evaluate`: curves from CSV files into the store, and
// endpoint methods applied to stored or imported curves.
#include <cstdio>
#include <fstream>
#include <iostream>
#include <memory>
#include <nlohmann/json.hpp>
#include <sstream>
#include <string>
#include <vector>

#include "chemistry/sample.hpp"
#include "controller/cli/commands.hpp"
#include "controller/curve_csv.hpp"
#include "controller/store/sqlite_store.hpp"
#include "controller/titration.hpp"
#include "detection/evaluate.hpp"

namespace veq::cli {

namespace {

using nlohmann::json;

std::string read_text_file(const std::string& path) {
  std::ifstream in(path, std::ios::binary);
  if (!in)
    throw CLI::Error("FileError", "cannot open '" + path + "'", 2);
  std::ostringstream text;
  text << in.rdbuf();
  return text.str();
}

detection::SignalKind kind_from(const std::string& name) {
  auto kind = detection::signal_kind_from_name(name);
  if (!kind) {
    throw CLI::ValidationError("--signal-kind", "unknown signal kind '" + name +
                                                    "' (potential_mv, p_metal, ph, absorbance, "
                                                    "transmittance)");
  }
  return *kind;
}

struct ImportOptions {
  std::string db = store::default_database_path();
  std::string file;
  controller::CsvColumns columns;
  std::string signal_kind = "potential_mv";
  double sample_volume_ml = 0.0;
  std::string sample_id;
  double titrant_conc_mol_per_l = 0.0;
  std::string titrant_name = "EDTA";
};

void run_import(const ImportOptions& o) {
  const auto kind = kind_from(o.signal_kind);
  // Everything is checked before the store is opened: a bad file stores nothing.
  auto rows = controller::parse_curve_csv(read_text_file(o.file), o.file, o.columns);
  if (!rows)
    throw CLI::Error("ImportError", rows.error().message, 2);
  auto curve = controller::to_curve(*rows, kind, o.sample_volume_ml);
  if (!curve)
    throw CLI::Error("ImportError", o.file + ": " + curve.error().message, 2);
  auto s = store::SqliteStore::open(o.db);
  if (!s)
    throw CLI::Error("StoreError", s.error().message, 2);
  store::NewRun run;
  run.sample_id = o.sample_id.empty() ? o.file : o.sample_id;
  run.method_name = "imported curve";
  run.method_json = json{{"imported_from", o.file},
                         {"columns",
                          {{"volume", o.columns.volume},
                           {"signal", o.columns.signal},
                           {"time", o.columns.time},
                           {"temperature", o.columns.temperature}}}}
                        .dump();
  run.signal_kind = static_cast<int>(kind);
  run.sample_volume_ml = o.sample_volume_ml;
  run.titrant_name = o.titrant_name;
  run.titrant_conc_mol_per_l = o.titrant_conc_mol_per_l;
  std::vector<store::PointRecord> points;
  for (std::size_t i = 0; i < rows->volume_ml.size(); ++i) {
    store::PointRecord p;
    p.index = static_cast<std::int64_t>(i);
    p.volume_ml = rows->volume_ml[i];
    p.signal = rows->signal[i];
    p.time_s = rows->time_s.empty() ? 0.0 : rows->time_s[i];
    p.temperature_c = rows->temperature_c.empty() ? 25.0 : rows->temperature_c[i];
    points.push_back(p);
  }
  auto id = (*s)->import_run(run, points, o.file);
  if (!id)
    throw CLI::Error("StoreError", id.error().message, 2);
  std::printf("imported %zu points from %s as run %lld in %s\n", points.size(), o.file.c_str(),
              static_cast<long long>(*id), o.db.c_str());
}

struct EvaluateOptions {
  std::string db = store::default_database_path();
  std::int64_t run_id = 0;
  std::string csv;
  controller::CsvColumns columns;
  std::string signal_kind = "potential_mv";
  double sample_volume_ml = 0.0;
  std::string method = "derivative";
  std::vector<std::string> options;  // name=value
  std::string options_json;
  std::string sample_file;  // sample chemistry for gran and model
  bool json_output = false;
};

json method_options(const EvaluateOptions& o) {
  json options = json::object();
  if (!o.options_json.empty()) {
    options = json::parse(o.options_json, nullptr, false);
    if (!options.is_object()) {
      throw CLI::ValidationError("--options-json", "not a JSON object: " + o.options_json);
    }
  }
  for (const auto& item : o.options) {
    const auto eq = item.find('=');
    if (eq == std::string::npos || eq == 0) {
      throw CLI::ValidationError("--option", "expected NAME=VALUE, got '" + item + "'");
    }
    // A value is read as JSON when it can be (numbers, true/false), else as text.
    const std::string value = item.substr(eq + 1);
    json parsed = json::parse(value, nullptr, false);
    options[item.substr(0, eq)] = parsed.is_discarded() ? json(value) : parsed;
  }
  if (!o.sample_file.empty()) {
    // Parsed here so that a bad document is reported with its file name; the
    // evaluation then keeps it among its options (and a stored evaluation
    // with them, so it can be repeated).
    auto sample = chemistry::parse_sample_json(read_text_file(o.sample_file));
    if (!sample)
      throw CLI::Error("EvaluateError", o.sample_file + ": " + sample.error().message, 2);
    options["sample"] = chemistry::to_json(*sample);
  }
  return options;
}

void run_evaluate(const EvaluateOptions& o) {
  const json options = method_options(o);
  std::unique_ptr<store::SqliteStore> s;
  Result<detection::Curve> curve = make_error(ErrorKind::invalid_input, "no curve");
  if (!o.csv.empty()) {
    auto rows = controller::parse_curve_csv(read_text_file(o.csv), o.csv, o.columns);
    if (!rows)
      throw CLI::Error("EvaluateError", rows.error().message, 2);
    curve = controller::to_curve(*rows, kind_from(o.signal_kind), o.sample_volume_ml);
  } else {
    if (o.run_id <= 0)
      throw CLI::ValidationError("--run", "give --run ID or --csv FILE");
    auto opened = store::SqliteStore::open(o.db);
    if (!opened)
      throw CLI::Error("StoreError", opened.error().message, 2);
    s = std::move(opened).value();
    auto run = s->load_run(o.run_id);
    if (!run)
      throw CLI::Error("StoreError", run.error().message, 2);
    auto points = s->load_points(o.run_id);
    if (!points)
      throw CLI::Error("StoreError", points.error().message, 2);
    detection::CurveColumns c;
    for (const auto& p : *points) {
      c.volume_ml.push_back(p.volume_ml);
      c.signal.push_back(p.signal);
      c.time_s.push_back(p.time_s);
      c.temperature_c.push_back(p.temperature_c);
    }
    c.kind = static_cast<detection::SignalKind>(run->run.signal_kind);
    c.sample_volume_ml = run->run.sample_volume_ml;
    curve = detection::Curve::from_columns(std::move(c));
  }
  if (!curve)
    throw CLI::Error("EvaluateError", curve.error().message, 2);
  auto evaluation = detection::evaluate(*curve, o.method, options);
  if (!evaluation)
    throw CLI::Error("EvaluateError", evaluation.error().message, 2);

  std::int64_t evaluation_id = 0;
  if (s) {
    // A new evaluation record; the raw points are never touched.
    const store::EvaluationRecord record = controller::evaluation_record(*evaluation);
    auto id = s->add_evaluation(o.run_id, record);
    if (!id)
      throw CLI::Error("StoreError", id.error().message, 2);
    evaluation_id = *id;
  }
  if (o.json_output) {
    json out = detection::to_json(*evaluation);
    if (s) {
      out["run"] = o.run_id;
      out["evaluation_id"] = evaluation_id;
    }
    std::cout << out.dump(2) << "\n";
    return;
  }
  std::printf("%s on %s: %zu endpoint(s)\n", evaluation->method.c_str(),
              o.csv.empty() ? ("run " + std::to_string(o.run_id)).c_str() : o.csv.c_str(),
              evaluation->endpoints.size());
  for (const auto& e : evaluation->endpoints) {
    std::printf("  %.4f mL  +/- %.4f mL (standard uncertainty)  signal %.3f  steepness %.1f/mL",
                e.volume_ml, e.uncertainty_ml, e.signal, e.steepness);
    for (auto f : e.flags)
      std::printf("  [%s]", detection::quality_flag_name(f));
    std::printf("\n");
  }
  for (auto f : evaluation->flags)
    std::printf("  curve flag: %s\n", detection::quality_flag_name(f));
  if (!evaluation->details.empty())
    std::printf("details:\n%s\n", evaluation->details.dump(2).c_str());
  if (s) {
    std::printf("stored as evaluation %lld of run %lld in %s\n",
                static_cast<long long>(evaluation_id), static_cast<long long>(o.run_id),
                o.db.c_str());
  }
}

void add_column_flags(CLI::App* cmd, controller::CsvColumns& c) {
  cmd->add_option("--volume-column", c.volume, "CSV column with the titrant volume, mL")
      ->capture_default_str();
  cmd->add_option("--signal-column", c.signal, "CSV column with the signal")->capture_default_str();
  cmd->add_option("--time-column", c.time, "CSV column with the time, s (optional)")
      ->capture_default_str();
  cmd->add_option("--temperature-column", c.temperature,
                  "CSV column with the temperature, degrees C (optional)")
      ->capture_default_str();
}

}  // namespace

void add_evaluate_commands(CLI::App& app) {
  auto io = std::make_shared<ImportOptions>();
  CLI::App* import = app.add_subcommand(
      "import",
      "Store a titration curve from a CSV file as a run (status 'imported'). The file needs a\n"
      "header line; bad rows are reported by line number and nothing is stored from a file\n"
      "that fails.");
  import->add_option("file", io->file, "CSV file")->required();
  import->add_option("--db", io->db, "SQLite file (default ./veq.sqlite or $VEQ_DB)")
      ->capture_default_str();
  add_column_flags(import, io->columns);
  import
      ->add_option("--signal-kind", io->signal_kind,
                   "potential_mv, p_metal, ph, absorbance or transmittance")
      ->capture_default_str();
  import->add_option("--sample-volume-ml", io->sample_volume_ml,
                     "sample volume before titrant, mL (for dilution correction)");
  import->add_option("--sample-id", io->sample_id, "sample name (default: the file name)");
  import->add_option("--titrant-conc", io->titrant_conc_mol_per_l, "titrant concentration, mol/L");
  import->add_option("--titrant", io->titrant_name, "titrant name")->capture_default_str();
  import->callback([io] { run_import(*io);
});

auto eo = std::make_shared<EvaluateOptions>();
std::string methods;
for (auto m : detection::method_names()) {
  if (!methods.empty())
    methods += ", ";
  methods += std::string(m);
}
CLI::App* evaluate = app.add_subcommand(
    "evaluate",
    "Find the endpoints of a stored run (--db FILE --run ID) or of a CSV curve (--csv FILE)\n"
    "with an endpoint method. Evaluating a stored run adds an evaluation record; raw points\n"
    "are never changed.");
evaluate->add_option("--db", eo->db, "SQLite file (default ./veq.sqlite or $VEQ_DB)")
    ->capture_default_str();
evaluate->add_option("--run", eo->run_id, "stored run to evaluate");
evaluate->add_option("--csv", eo->csv, "CSV curve to evaluate instead of a stored run");
add_column_flags(evaluate, eo->columns);
evaluate->add_option("--signal-kind", eo->signal_kind, "signal kind of a CSV curve")
    ->capture_default_str();
evaluate->add_option("--sample-volume-ml", eo->sample_volume_ml,
                     "sample volume of a CSV curve, mL");
evaluate->add_option("--method", eo->method, "endpoint method: " + methods)->capture_default_str();
evaluate->add_option("--option", eo->options,
                     "method option NAME=VALUE (repeatable; see docs/detection.md)");
evaluate->add_option("--options-json", eo->options_json, "method options as a JSON object");
evaluate->add_option("--sample", eo->sample_file,
                     "sample chemistry for --method gran or model: a sample document as for "
                     "veq predict (docs/chemistry.md)");
evaluate->add_flag("--json", eo->json_output, "print JSON");
evaluate->callback([eo] { run_evaluate(*eo); });
}  // namespace veq::cli

}  // namespace veq::cli
