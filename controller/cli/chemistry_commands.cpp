// `veq speciate` and `veq predict`: the equilibrium engine from the command
// line, for choosing pH, buffer and titrant before a method is run.
#include <cstdio>
#include <fstream>
#include <iostream>
#include <memory>
#include <nlohmann/json.hpp>
#include <sstream>
#include <string>
#include <vector>

#include "chemistry/constants.hpp"
#include "chemistry/constants_file.hpp"
#include "chemistry/prediction.hpp"
#include "chemistry/sample.hpp"
#include "controller/cli/commands.hpp"

namespace veq::cli {

namespace {

using nlohmann::json;

/// The sample, from a file or from flags (flags are turned into the same JSON
/// document, so both paths are validated by one parser).
struct SampleFlags {
  std::string file;
  std::vector<std::string> metals;  // NAME=CONC
  double sample_volume_ml = 0.0;
  double ph = -1.0;
  std::string buffer;                // NAME=TOTAL
  std::vector<std::string> ligands;  // NAME=TOTAL
  std::string titrant;               // NAME=CONC
  std::string indicator;             // NAME=CONC
  std::string signal = "pM";
  std::string constants_file;
  bool json_output = false;
};

std::pair<std::string, double> name_and_number(const std::string& text, const char* flag) {
  const auto eq = text.find('=');
  if (eq == std::string::npos || eq == 0) {
    throw CLI::ValidationError(flag, "expected NAME=NUMBER, got '" + text + "'");
  }
  try {
    std::size_t used = 0;
    const double v = std::stod(text.substr(eq + 1), &used);
    if (used != text.size() - eq - 1)
      throw std::invalid_argument("trailing characters");
    return {text.substr(0, eq), v};
  } catch (const std::exception&) {
    throw CLI::ValidationError(flag,
                               "'" + text.substr(eq + 1) + "' is not a number in '" + text + "'");
  }
}

std::string read_file(const std::string& path) {
  std::ifstream in(path, std::ios::binary);
  if (!in)
    throw CLI::Error("FileError", "cannot open '" + path + "'", 2);
  std::ostringstream text;
  text << in.rdbuf();
  return text.str();
}

chemistry::SampleComposition sample_from(const SampleFlags& f) {
  std::string text;
  if (!f.file.empty()) {
    text = read_file(f.file);
  } else {
    json doc;
    doc["sample_volume_ml"] = f.sample_volume_ml;
    doc["metals"] = json::array();
    for (const auto& m : f.metals) {
      auto [name, conc] = name_and_number(m, "--metal");
      doc["metals"].push_back({{"name", name}, {"conc_mol_per_l", conc}});
    }
    if (f.ph >= 0.0)
      doc["ph"] = f.ph;
    if (!f.buffer.empty()) {
      auto [name, total] = name_and_number(f.buffer, "--buffer");
      doc["buffer"] = {{"name", name}, {"total_mol_per_l", total}};
    }
    for (const auto& l : f.ligands) {
      auto [name, total] = name_and_number(l, "--ligand");
      doc["ligands"].push_back({{"name", name}, {"total_mol_per_l", total}});
    }
    if (!f.titrant.empty()) {
      auto [name, conc] = name_and_number(f.titrant, "--titrant");
      doc["titrant"] = {{"name", name}, {"conc_mol_per_l", conc}};
    }
    if (!f.indicator.empty()) {
      auto [name, conc] = name_and_number(f.indicator, "--indicator");
      doc["indicator"] = {{"name", name}, {"conc_mol_per_l", conc}};
    }
    doc["signal"] = {{"kind", f.signal}};
    text = doc.dump();
  }
  auto sample = chemistry::parse_sample_json(text);
  if (!sample) {
    throw CLI::Error(
        "SampleError",
        (f.file.empty() ? std::string("sample flags: ") : f.file + ": ") + sample.error().message,
        2);
  }
  return *sample;
}

chemistry::ConstantsLibrary library_from(const SampleFlags& f) {
  auto library = f.constants_file.empty() ? chemistry::builtin_constants_library()
                                          : chemistry::load_constants_library(f.constants_file);
  if (!library)
    throw CLI::Error("ConstantsError", library.error().message, 2);
  return *library;
}

void add_sample_flags(CLI::App* cmd, SampleFlags& f) {
  cmd->add_option("--sample", f.file,
                  "sample composition file (JSON, format in docs/chemistry.md); "
                  "or give the flags below");
  cmd->add_option("--metal", f.metals, "metal and its concentration, NAME=MOL_PER_L (repeatable)");
  cmd->add_option("--sample-volume-ml", f.sample_volume_ml, "sample volume before titrant, mL");
  cmd->add_option("--ph", f.ph, "buffered pH (omit to find it from the proton balance)");
  cmd->add_option("--buffer", f.buffer, "buffer ligand and its total, NAME=MOL_PER_L");
  cmd->add_option("--ligand", f.ligands,
                  "auxiliary or masking ligand and its total, NAME=MOL_PER_L (repeatable)");
  cmd->add_option("--titrant", f.titrant, "titrant and its concentration, NAME=MOL_PER_L");
  cmd->add_option("--indicator", f.indicator, "indicator and its concentration, NAME=MOL_PER_L");
  cmd->add_option("--signal", f.signal, "signal to predict: pM, potential or absorbance")
      ->capture_default_str();
  cmd->add_option("--constants", f.constants_file,
                  "constants library file instead of the built-in one (chemistry/data/)");
  cmd->add_flag("--json", f.json_output, "print JSON");
}

}  // namespace

void add_chemistry_commands(CLI::App& app) {
  auto speciate_flags = std::make_shared<SampleFlags>();
  auto added_ml = std::make_shared<double>(0.0);
  CLI::App* speciate = app.add_subcommand(
      "speciate",
      "Free concentrations and distribution of every component for one composition\n"
      "(a sample, optionally after some titrant), from the equilibrium engine.");
  add_sample_flags(speciate, *speciate_flags);
  speciate->add_option("--added-ml", *added_ml, "titrant already added, mL")->capture_default_str();
  speciate->callback([speciate_flags, added_ml] {
    const auto library = library_from(*speciate_flags);
    const auto sample = sample_from(*speciate_flags);
    auto report = chemistry::speciate(library, sample, *added_ml);
    if (!report)
      throw CLI::Error("SolverError", report.error().message, 1);
    if (speciate_flags->json_output) {
      std::cout << chemistry::to_json(*report).dump(2) << "\n";
      return;
    }
    std::printf(
        "after %.3f mL titrant: pH %.3f, ionic strength %.4f mol/L (%d iterations, "
        "largest mass-balance residual %.1e)\n",
        report->added_ml, report->ph, report->ionic_strength_mol_per_l, report->iterations,
        report->max_relative_residual);
    for (const auto& c : report->components) {
      std::printf("\n%s: total %.4e mol/L, free %.4e mol/L\n", c.name.c_str(), c.total_mol_per_l,
                  c.free_mol_per_l);
      for (const auto& [species, fraction] : c.fractions) {
        if (fraction < 1e-6)
          continue;
        std::printf("  %-28s %8.4f %%\n", species.c_str(), 100.0 * fraction);
      }
    }
    const auto j = chemistry::to_json(*report);
    if (j.contains("conditional")) {
      std::printf("\nconditional formation constants with the titrant:\n%s\n",
                  j["conditional"].dump(2).c_str());
    }
  });

  auto predict_flags = std::make_shared<SampleFlags>();
  auto csv_path = std::make_shared<std::string>();
  CLI::App* predict = app.add_subcommand(
      "predict",
      "Predicted titration curve of a sample: the breaks (position and size), the indicator\n"
      "endpoint if an indicator is given, and whether each endpoint will be sharp enough,\n"
      "in which pH window, and whether two metals can be titrated one after the other.");
  add_sample_flags(predict, *predict_flags);
  predict->add_option("--csv", *csv_path, "also write the predicted curve to this CSV file");
  predict->callback([predict_flags, csv_path] {
    const auto library = library_from(*predict_flags);
    const auto sample = sample_from(*predict_flags);
    auto prediction = chemistry::predict(library, sample);
    if (!prediction)
      throw CLI::Error("SolverError", prediction.error().message, 1);
    if (!csv_path->empty()) {
      std::ofstream out(*csv_path, std::ios::binary);
      out << chemistry::curve_csv(*prediction);
      if (!out)
        throw CLI::Error("FileError", "cannot write '" + *csv_path + "'", 2);
    }
    const auto j = chemistry::to_json(*prediction);
    if (predict_flags->json_output) {
      json out = j;
      out.erase("curve");  // the curve goes to --csv; JSON keeps the findings
      if (!csv_path->empty())
        out["curve_csv"] = *csv_path;
      std::cout << out.dump(2) << "\n";
      return;
    }
    std::printf("predicted %s curve, %zu points%s\n", prediction->signal_label.c_str(),
                prediction->curve.size(),
                csv_path->empty() ? "" : (" (written to " + *csv_path + ")").c_str());
    std::printf("\nbreaks:\n%s\n", j.value("breaks", json::array()).dump(2).c_str());
    if (j.contains("indicator") && !j["indicator"].is_null()) {
      std::printf("\nindicator endpoint:\n%s\n", j["indicator"].dump(2).c_str());
    }
    std::printf("\nfeasibility:\n%s\n", j.value("feasibility", json::object()).dump(2).c_str());
  });
}

}  // namespace veq::cli
