// Speed of the equilibrium engine on a single-metal EDTA titration in ammonia
// buffer: 1.0e-3 M Zn2+ in 50 mL at pH 10 with 0.1 M ammonia and 1e-5 M
// Eriochrome Black T, titrated with 1.0e-3 M EDTA (5 components, 22 species from
// the shipped constants library). Targets (docs/chemistry.md): >= 100,000 cold
// solves per second on one core, a 500-point predicted curve in < 2 ms.
//
// After the Google Benchmark cases, the program runs the NumPy reference solver
// (numpy_reference.py beside this file, with /usr/bin/python3) on the same
// system, checks that both give the same pZn, and prints the speed ratios.
#include <benchmark/benchmark.h>

#include <array>
#include <cmath>
#include <cstdio>
#include <ctime>
#include <iostream>
#include <memory>
#include <string>

#include <nlohmann/json.hpp>

#include "chemistry/constants.hpp"
#include "chemistry/equilibrium.hpp"
#include "chemistry/prediction.hpp"
#include "chemistry/sample.hpp"

namespace {

using namespace veq::chemistry;  // NOLINT: a benchmark program, not a header

SampleComposition bench_sample() {
  SampleComposition s;
  s.sample_volume_ml = 50.0;
  s.metals = {{"Zn", 1.0e-3}};
  s.ph = 10.0;
  s.ligands = {{"ammonia", 0.1, 0.0}};
  s.titrant = {"EDTA", 1.0e-3, 2.0};
  s.indicator = IndicatorSpec{"Eriochrome Black T", 1.0e-5};
  s.curve.points = 500;
  return s;
}

TitrationModel make_model(const SampleComposition& s = bench_sample()) {
  auto lib = builtin_constants_library();
  if (!lib)
    throw std::runtime_error(lib.error().message);
  auto model = TitrationModel::create(*lib, s);
  if (!model)
    throw std::runtime_error(model.error().message);
  return std::move(*model);
}

// Volumes around the equivalence point (50 mL), where the solver works hardest.
std::array<double, 64> cold_volumes() {
  std::array<double, 64> v{};
  for (std::size_t k = 0; k < v.size(); ++k)
    v[k] = 25.0 + 50.0 * static_cast<double>(k) / 63.0;
  return v;
}

void BM_ColdSolveFixedPh(benchmark::State& state) {
  auto model = make_model();
  const auto volumes = cold_volumes();
  Speciation out;
  std::size_t k = 0;
  for (auto _ : state) {
    auto r = model.solve_at(volumes[k++ % volumes.size()], out);
    if (!r)
      state.SkipWithError(r.error().message.c_str());
    benchmark::DoNotOptimize(out.free_mol_per_l.data());
  }
  state.SetItemsProcessed(state.iterations());
}
BENCHMARK(BM_ColdSolveFixedPh);

void BM_ColdSolveProtonBalance(benchmark::State& state) {
  auto s = bench_sample();
  s.ph.reset();                                                   // pH from the proton balance:
  s.ligands = {{"ammonia", 0.1, 0.0}, {"ammonia", 0.0176, 1.0}};  // NH3 + NH4Cl, about pH 10
  auto model = make_model(s);
  const auto volumes = cold_volumes();
  Speciation out;
  std::size_t k = 0;
  for (auto _ : state) {
    auto r = model.solve_at(volumes[k++ % volumes.size()], out);
    if (!r)
      state.SkipWithError(r.error().message.c_str());
    benchmark::DoNotOptimize(out.free_mol_per_l.data());
  }
  state.SetItemsProcessed(state.iterations());
}
BENCHMARK(BM_ColdSolveProtonBalance);

void BM_WarmSolveAlongCurve(benchmark::State& state) {
  auto model = make_model();
  Speciation a, b;
  (void)model.solve_at(0.0, a);
  for (auto _ : state) {
    for (int k = 1; k < 500; ++k) {
      auto r = model.solve_at(75.0 * k / 499.0, b, &a);
      if (!r)
        state.SkipWithError(r.error().message.c_str());
      std::swap(a, b);
    }
  }
  state.SetItemsProcessed(state.iterations() * 499);
}
BENCHMARK(BM_WarmSolveAlongCurve);

void BM_PredictedCurve500(benchmark::State& state) {
  // The curve of predict(): pM, indicator fraction and signal at 500 volumes.
  auto model = make_model();
  Speciation a, b;
  std::vector<CurvePoint> curve(500);
  for (auto _ : state) {
    for (int k = 0; k < 500; ++k) {
      auto r = model.solve_at(75.0 * k / 499.0, b, k == 0 ? nullptr : &a);
      if (!r)
        state.SkipWithError(r.error().message.c_str());
      auto& p = curve[static_cast<std::size_t>(k)];
      p.volume_ml = 75.0 * k / 499.0;
      p.ph = b.ph;
      p.signal = model.signal(b);
      p.indicator_bound_fraction = model.indicator_bound_fraction(b);
      std::swap(a, b);
    }
    benchmark::DoNotOptimize(curve.data());
  }
}
BENCHMARK(BM_PredictedCurve500)->Unit(benchmark::kMillisecond);

void BM_PredictWhole(benchmark::State& state) {
  // Everything `veq predict` computes: curve, breaks, indicator endpoint and
  // feasibility with pH windows and masking checks.
  auto lib = builtin_constants_library();
  const auto s = bench_sample();
  for (auto _ : state) {
    auto p = predict(*lib, s);
    if (!p)
      state.SkipWithError(p.error().message.c_str());
    benchmark::DoNotOptimize(p->curve.data());
  }
}
BENCHMARK(BM_PredictWhole)->Unit(benchmark::kMillisecond);

template <typename F>
double seconds_per_call(F&& f, int calls) {
  const auto start = std::chrono::steady_clock::now();
  for (int k = 0; k < calls; ++k)
    f(k);
  return std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count() / calls;
}

int compare_with_numpy() {
  const std::string script = std::string(VEQ_SOURCE_DIR) + "/bench/chemistry/numpy_reference.py";
  const std::string constants = std::string(VEQ_SOURCE_DIR) + "/chemistry/data/constants.json";
  const std::string command = "/usr/bin/python3 '" + script + "' '" + constants + "'";
  std::unique_ptr<FILE, int (*)(FILE*)> pipe(popen(command.c_str(), "r"), pclose);
  if (!pipe) {
    std::cerr << "cannot run " << command << "\n";
    return 1;
  }
  std::string output;
  std::array<char, 4096> buffer{};
  while (std::fgets(buffer.data(), buffer.size(), pipe.get()))
    output += buffer.data();
  nlohmann::json ref;
  try {
    ref = nlohmann::json::parse(output);
  } catch (const std::exception&) {
    std::cerr << "NumPy reference gave no result (is python3-numpy installed?): " << output << "\n";
    return 1;
  }
  auto model = make_model();
  Speciation out, prev;
  const auto volumes = cold_volumes();
  const double cold_s = seconds_per_call(
      [&](int k) { (void)model.solve_at(volumes[static_cast<std::size_t>(k) % 64], out); }, 200000);
  const double curve_s = seconds_per_call(
      [&](int) {
        for (int k = 0; k < 500; ++k) {
          (void)model.solve_at(75.0 * k / 499.0, out, k == 0 ? nullptr : &prev);
          std::swap(out, prev);
        }
      },
      200);
  double worst = 0.0;
  for (const auto& [volume, pzn] : ref["pzn"].items()) {
    (void)model.solve_at(std::stod(volume), out);
    worst = std::max(worst, std::abs(model.p_metal(out, 0) - pzn.get<double>()));
  }
  const double numpy_cold = ref["cold_solves_per_s"].get<double>();
  const double numpy_curve_ms = ref["curve_500_ms"].get<double>();
  std::printf("\nComparison with the NumPy reference (same system, this run, processor time)\n");
  std::printf("  cold solves per second:   C++ %10.0f   NumPy %8.0f   ratio %6.0fx\n", 1.0 / cold_s,
              numpy_cold, 1.0 / cold_s / numpy_cold);
  std::printf("  500-point curve, ms:      C++ %10.3f   NumPy %8.1f   ratio %6.0fx\n",
              curve_s * 1e3, numpy_curve_ms, numpy_curve_ms / (curve_s * 1e3));
  std::printf("  largest pZn difference at 10, 49, 50, 51, 70 mL: %.2e\n", worst);
  return worst < 1e-6 ? 0 : 2;
}

}  // namespace

int main(int argc, char** argv) {
  benchmark::Initialize(&argc, argv);
  if (benchmark::ReportUnrecognizedArguments(argc, argv))
    return 1;
  benchmark::RunSpecifiedBenchmarks();
  benchmark::Shutdown();
  return compare_with_numpy();
}
