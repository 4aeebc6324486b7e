// Curves (fits) per second for the methods that use the sample chemistry:
// Gran (calibrated and fitted slope, with the metal-fraction correction in
// ammonia) and the model fit (1:1 closed form, general speciation with one
// and two metals), all at 200 points. The curves are seeded trial curves
// (detection/trials.hpp), so every run measures the same work.
//
//   veq_detection_fit_bench [--write-curves=DIR] [Google Benchmark flags]
//
// --write-curves writes the curves, their samples and this program's
// endpoints to DIR so that reference_scipy_fit.py can time NumPy/SciPy
// implementations on the same curves and check that they agree.
#include <benchmark/benchmark.h>

#include <cmath>
#include <cstring>
#include <fstream>
#include <string>
#include <vector>

#include "chemistry/constants.hpp"
#include "detection/gran.hpp"
#include "detection/model_fit.hpp"
#include "detection/trials.hpp"

namespace {

using veq::detection::Curve;
using veq::detection::TrialCurve;
using veq::detection::TrialScenario;

constexpr int kCurves = 16;
constexpr int kPoints = 200;

const veq::chemistry::ConstantsLibrary& library() {
  static const auto lib = veq::chemistry::builtin_constants_library().value();
  return lib;
}

// A built-in scenario recorded with even steps to `kPoints` points.
TrialScenario scenario(const char* name) {
  TrialScenario s = veq::detection::builtin_trial_scenario(name).value();
  double nominal = 0.0;
  for (const auto& m : s.sample.metals)
    nominal += m.conc_mol_per_l * s.sample.sample_volume_ml / s.sample.titrant.conc_mol_per_l;
  s.end_volume_ml = 1.3 * nominal;
  s.step_ml = s.end_volume_ml / (kPoints - 1);
  s.fine_step_ml = 0.0;
  return s;
}

const std::vector<TrialCurve>& curves(const char* name) {
  static std::vector<std::pair<std::string, std::vector<TrialCurve>>> cache;
  for (const auto& [key, value] : cache) {
    if (key == name)
      return value;
  }
  std::vector<TrialCurve> made;
  const TrialScenario s = scenario(name);
  for (int k = 0; k < kCurves; ++k)
    made.push_back(veq::detection::simulate_trial_curve(s, 1000 + k, library()).value());
  cache.emplace_back(name, std::move(made));
  return cache.back().second;
}

template <typename F>
void run(benchmark::State& state, const char* name, F evaluate) {
  const auto& c = curves(name);
  std::size_t i = 0;
  for (auto _ : state) {
    auto ev = evaluate(c[i++ % c.size()].curve);
    benchmark::DoNotOptimize(ev);
  }
  state.counters["curves_per_s"] =
      benchmark::Counter(static_cast<double>(state.iterations()), benchmark::Counter::kIsRate);
  state.counters["points"] = static_cast<double>(c.front().curve.size());
}

veq::detection::GranOptions gran_options(const char* name, double slope) {
  veq::detection::GranOptions o;
  o.slope_mv_per_decade = slope;
  if (std::strcmp(name, "ammonia_copper") == 0)
    o.sample = scenario(name).sample;
  return o;
}

veq::detection::ModelFitOptions model_options(const char* name) {
  veq::detection::ModelFitOptions o;
  o.sample = scenario(name).sample;
  return o;
}

void BM_GranCalibratedSlope(benchmark::State& state) {
  const auto o = gran_options("strong_break", 29.58);
  run(state, "strong_break",
      [&](const Curve& c) { return veq::detection::find_endpoints_by_gran(c, o, library()); });
}

void BM_GranFittedSlope(benchmark::State& state) {
  const auto o = gran_options("strong_break", 0.0);
  run(state, "strong_break",
      [&](const Curve& c) { return veq::detection::find_endpoints_by_gran(c, o, library()); });
}

void BM_GranAmmoniaCorrected(benchmark::State& state) {
  const auto o = gran_options("ammonia_copper", 0.0);
  run(state, "ammonia_copper",
      [&](const Curve& c) { return veq::detection::find_endpoints_by_gran(c, o, library()); });
}

void BM_ModelOneToOne(benchmark::State& state) {
  const auto o = model_options("strong_break");
  run(state, "strong_break",
      [&](const Curve& c) { return veq::detection::fit_titration_model(c, o, library()); });
}

void BM_ModelSpeciationAmmonia(benchmark::State& state) {
  const auto o = model_options("ammonia_copper");
  run(state, "ammonia_copper",
      [&](const Curve& c) { return veq::detection::fit_titration_model(c, o, library()); });
}

void BM_ModelSpeciationTwoMetals(benchmark::State& state) {
  const auto o = model_options("two_metals");
  run(state, "two_metals",
      [&](const Curve& c) { return veq::detection::fit_titration_model(c, o, library()); });
}

BENCHMARK(BM_GranCalibratedSlope);
BENCHMARK(BM_GranFittedSlope);
BENCHMARK(BM_GranAmmoniaCorrected);
BENCHMARK(BM_ModelOneToOne);
BENCHMARK(BM_ModelSpeciationAmmonia)->Unit(benchmark::kMillisecond);
BENCHMARK(BM_ModelSpeciationTwoMetals)->Unit(benchmark::kMillisecond);

// One file per set: a JSON line with the sample, then per curve a line with
// the volumes, one with the signals, one with the truth and this program's
// endpoint (first one) for each method.
void write_set(const std::string& path, const char* name) {
  std::ofstream out(path);
  out.precision(17);
  const TrialScenario s = scenario(name);
  out << veq::chemistry::to_json(s.sample).dump() << "\n";
  const auto gran = gran_options(name, 29.58);
  const auto model = model_options(name);
  for (const TrialCurve& c : curves(name)) {
    for (double x : c.curve.volume_ml())
      out << x << ' ';
    out << "\n";
    for (double x : c.curve.signal())
      out << x << ' ';
    out << "\n";
    auto g = veq::detection::find_endpoints_by_gran(c.curve, gran, library());
    auto m = veq::detection::fit_titration_model(c.curve, model, library());
    out << c.equivalence_ml.front() << ' '
        << (g && !g->endpoints.empty() ? g->endpoints.front().volume_ml : std::nan("")) << ' '
        << (m && !m->endpoints.empty() ? m->endpoints.front().volume_ml : std::nan("")) << "\n";
  }
}

}  // namespace

int main(int argc, char** argv) {
  std::vector<char*> rest;
  for (int i = 0; i < argc; ++i) {
    if (std::strncmp(argv[i], "--write-curves=", 15) == 0) {
      const std::string dir = argv[i] + 15;
      write_set(dir + "/strong_break.txt", "strong_break");
      write_set(dir + "/ammonia_copper.txt", "ammonia_copper");
      return 0;
    }
    rest.push_back(argv[i]);
  }
  int count = static_cast<int>(rest.size());
  benchmark::Initialize(&count, rest.data());
  if (benchmark::ReportUnrecognizedArguments(count, rest.data()))
    return 1;
  benchmark::RunSpecifiedBenchmarks();
  benchmark::Shutdown();
  return 0;
}
