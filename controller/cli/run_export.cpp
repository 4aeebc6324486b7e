#include "controller/cli/run_export.hpp"

#include <algorithm>
#include <cerrno>
#include <cstdio>
#include <cstring>
#include <fstream>

namespace veq::cli {

namespace {

// 10 significant digits: more than any instrument resolves (a burette
// reads to 1 uL of 20 mL, 5 digits), few enough to stay readable.
std::string number(double value) {
  char text[40];
  std::snprintf(text, sizeof text, "%.10g", value);
  return text;
}

std::string csv_field(std::string_view field) {
  if (field.find_first_of(",\"\r\n") == std::string_view::npos)
    return std::string(field);
  std::string out = "\"";
  for (char c : field) {
    if (c == '"')
      out += '"';
    out += c;
  }
  out += '"';
  return out;
}

void row(std::string& out, const std::vector<std::string>& fields) {
  for (std::size_t i = 0; i < fields.size(); ++i) {
    if (i > 0)
      out += ',';
    out += csv_field(fields[i]);
  }
  out += '\n';
}

struct RunData {
  store::RunRecord run;
  std::vector<store::PointRecord> points;
  std::vector<store::EvaluationRecord> evaluations;
  std::vector<store::ResultRecord> results;
};

veq::Result<RunData> load(store::RunStore& store, std::int64_t run_id, bool points) {
  RunData d;
  auto run = store.load_run(run_id);
  if (!run)
    return run.error();
  d.run = std::move(*run);
  if (points) {
    auto p = store.load_points(run_id);
    if (!p)
      return p.error();
    d.points = std::move(*p);
  }
  auto e = store.load_evaluations(run_id);
  if (!e)
    return e.error();
  d.evaluations = std::move(*e);
  auto r = store.load_results(run_id);
  if (!r)
    return r.error();
  d.results = std::move(*r);
  return d;
}

}  // namespace

const char* export_table_name(ExportTable table) noexcept {
  switch (table) {
    case ExportTable::runs:
      return "runs";
    case ExportTable::points:
      return "points";
    case ExportTable::evaluations:
      return "evaluations";
    case ExportTable::results:
      return "results";
  }
  return "?";
}

std::optional<ExportTable> export_table_from_name(std::string_view name) {
  for (auto t :
       {ExportTable::runs, ExportTable::points, ExportTable::evaluations, ExportTable::results}) {
    if (name == export_table_name(t))
      return t;
  }
  return std::nullopt;
}

const char* signal_unit(int signal_kind) noexcept {
  switch (signal_kind) {
    case 1:
      return "mV";
    case 2:
      return "pM";
    case 3:
      return "pH";
    case 4:
      return "absorbance";
    case 5:
      return "%T";
    default:
      return "unknown";
  }
}

veq::Result<std::vector<std::int64_t>> all_run_ids(store::RunStore& store) {
  auto runs = store.list_runs();
  if (!runs)
    return runs.error();
  std::vector<std::int64_t> ids;
  for (const auto& r : *runs)
    ids.push_back(r.id);
  std::sort(ids.begin(), ids.end());
  return ids;
}

veq::Result<std::string> export_csv(store::RunStore& store,
                                    const std::vector<std::int64_t>& run_ids, ExportTable table) {
  std::string out;
  switch (table) {
    case ExportTable::runs:
      row(out,
          {"run_id", "sample_id", "series", "status", "end_reason", "started_utc", "finished_utc",
           "method_name", "titrant_name", "titrant_conc_mol_per_l", "sample_volume_ml",
           "signal_unit", "point_count", "software_version", "burette", "sensor"});
      break;
    case ExportTable::points:
      // volume_ml, signal, time_s and temperature_c are the names `veq
      // import` reads by default, so one run's points import back as they are.
      row(out, {"run_id", "index", "time_s", "volume_ml", "signal", "signal_unit", "temperature_c",
                "drift_per_min", "settle_s"});
      break;
    case ExportTable::evaluations:
      row(out, {"run_id", "evaluation_id", "method", "created_utc", "evaluation_flags",
                "endpoint_index", "volume_ml", "uncertainty_ml", "signal", "steepness_per_ml",
                "endpoint_flags", "options_json"});
      break;
    case ExportTable::results:
      row(out, {"run_id", "evaluation_id", "result_id", "name", "value", "unit"});
      break;
  }
  for (const std::int64_t id : run_ids) {
    auto d = load(store, id, table == ExportTable::points);
    if (!d)
      return d.error();
    const std::string run = std::to_string(id);
    const std::string unit = signal_unit(d->run.run.signal_kind);
    switch (table) {
      case ExportTable::runs:
        row(out,
            {run, d->run.run.sample_id, d->run.run.series, store::run_status_name(d->run.status),
             d->run.end_reason, d->run.started_utc, d->run.finished_utc, d->run.run.method_name,
             d->run.run.titrant_name, number(d->run.run.titrant_conc_mol_per_l),
             number(d->run.run.sample_volume_ml), unit, std::to_string(d->run.point_count),
             d->run.software_version, d->run.run.burette, d->run.run.sensor});
        break;
      case ExportTable::points:
        for (const auto& p : d->points) {
          row(out, {run, std::to_string(p.index), number(p.time_s), number(p.volume_ml),
                    number(p.signal), unit, number(p.temperature_c), number(p.drift_per_min),
                    number(p.settle_s)});
        }
        break;
      case ExportTable::evaluations:
        for (const auto& e : d->evaluations) {
          if (e.endpoints.empty()) {
            // An evaluation that found nothing still shows, with empty endpoint fields.
            row(out, {run, std::to_string(e.id), e.method, e.created_utc, e.flags, "", "", "", "",
                      "", "", e.options_json});
          }
          for (std::size_t i = 0; i < e.endpoints.size(); ++i) {
            const auto& p = e.endpoints[i];
            row(out, {run, std::to_string(e.id), e.method, e.created_utc, e.flags,
                      std::to_string(i), number(p.volume_ml), number(p.uncertainty_ml),
                      number(p.signal), number(p.steepness), p.flags, e.options_json});
          }
        }
        break;
      case ExportTable::results:
        for (const auto& r : d->results) {
          row(out, {run, std::to_string(r.evaluation_id), std::to_string(r.id), r.name,
                    number(r.value), r.unit});
        }
        break;
    }
  }
  return out;
}

veq::Result<nlohmann::json> export_json(store::RunStore& store,
                                        const std::vector<std::int64_t>& run_ids) {
  nlohmann::json out = nlohmann::json::array();
  for (const std::int64_t id : run_ids) {
    auto d = load(store, id, true);
    if (!d)
      return d.error();
    const auto& r = d->run;
    nlohmann::json j;
    j["run_id"] = id;
    j["sample_id"] = r.run.sample_id;
    j["series"] = r.run.series;
    j["status"] = store::run_status_name(r.status);
    j["end_reason"] = r.end_reason;
    j["started_utc"] = r.started_utc;
    j["finished_utc"] = r.finished_utc;
    j["software_version"] = r.software_version;
    j["method_name"] = r.run.method_name;
    // The method's settings as an object when they parse, else as the text stored.
    auto method = nlohmann::json::parse(r.run.method_json, nullptr, false);
    j["method"] = method.is_discarded() ? nlohmann::json(r.run.method_json) : method;
    j["titrant_name"] = r.run.titrant_name;
    j["titrant_conc_mol_per_l"] = r.run.titrant_conc_mol_per_l;
    j["sample_volume_ml"] = r.run.sample_volume_ml;
    j["signal_unit"] = signal_unit(r.run.signal_kind);
    j["burette"] = r.run.burette;
    j["sensor"] = r.run.sensor;
    j["points"] = nlohmann::json::array();
    for (const auto& p : d->points) {
      j["points"].push_back({{"index", p.index},
                             {"time_s", p.time_s},
                             {"volume_ml", p.volume_ml},
                             {"signal", p.signal},
                             {"temperature_c", p.temperature_c},
                             {"drift_per_min", p.drift_per_min},
                             {"settle_s", p.settle_s}});
    }
    j["evaluations"] = nlohmann::json::array();
    for (const auto& e : d->evaluations) {
      nlohmann::json ev = {{"evaluation_id", e.id},
                           {"method", e.method},
                           {"created_utc", e.created_utc},
                           {"flags", e.flags},
                           {"endpoints", nlohmann::json::array()}};
      auto options = nlohmann::json::parse(e.options_json, nullptr, false);
      ev["options"] = options.is_discarded() ? nlohmann::json(e.options_json) : options;
      for (const auto& p : e.endpoints) {
        ev["endpoints"].push_back({{"volume_ml", p.volume_ml},
                                   {"uncertainty_ml", p.uncertainty_ml},
                                   {"signal", p.signal},
                                   {"steepness_per_ml", p.steepness},
                                   {"flags", p.flags}});
      }
      j["evaluations"].push_back(std::move(ev));
    }
    j["results"] = nlohmann::json::array();
    for (const auto& res : d->results) {
      j["results"].push_back({{"result_id", res.id},
                              {"evaluation_id", res.evaluation_id},
                              {"name", res.name},
                              {"value", res.value},
                              {"unit", res.unit}});
    }
    out.push_back(std::move(j));
  }
  return out;
}

veq::Result<void> write_text_file(const std::string& path, std::string_view text) {
  errno = 0;
  std::ofstream file(path, std::ios::binary | std::ios::trunc);
  if (!file) {
    return make_error(ErrorKind::io, "cannot write " + path + ": " +
                                         (errno ? std::strerror(errno) : "cannot open") +
                                         " (check that the folder exists and is writable)");
  }
  file.write(text.data(), static_cast<std::streamsize>(text.size()));
  file.flush();
  if (!file)
    return make_error(ErrorKind::io, "cannot write " + path + ": write failed (disk full?)");
  return {};
}

}  // namespace veq::cli
