// Curves per second for each endpoint method at 50, 200 and 1000 points.
// The curves are simulated 1:1 titrations (the exact closed form of
// veq_chemistry), seeded, so every run measures the same work.
//
//   veq_detection_bench [--write-curves=DIR] [Google Benchmark flags]
//
// --write-curves writes the curves and this program's endpoints to DIR so
// that reference_numpy.py can time a NumPy implementation on the same curves
// and check that it finds the same endpoints (see bench/detection/README.md).
#include <benchmark/benchmark.h>

#include <cmath>
#include <cstdio>
#include <cstring>
#include <fstream>
#include <random>
#include <string>
#include <vector>

#include "chemistry/one_to_one.hpp"
#include "detection/crossing.hpp"
#include "detection/derivative.hpp"
#include "detection/segments.hpp"

namespace {

using veq::detection::Curve;
using veq::detection::CurveColumns;
using veq::detection::SignalKind;

constexpr int kCurvesPerSize = 32;
constexpr double kSampleMl = 50.0;
constexpr double kEndMl = 15.0;
// Equivalence potential of the demo electrode (see potential_curve); the
// crossing method looks for it.
constexpr double kElectrodeZeroMv = 150.0;

veq::chemistry::OneToOneTitration titration(double metal_mol_per_l, double equivalence_ml,
                                            double constant) {
  veq::chemistry::OneToOneTitration t;
  t.metal_conc_mol_per_l = metal_mol_per_l;
  t.sample_volume_ml = kSampleMl;
  t.titrant_conc_mol_per_l = metal_mol_per_l * kSampleMl / equivalence_ml;
  t.conditional_constant = constant;
  return t;
}

std::vector<double> grid(int points) {
  std::vector<double> v(static_cast<std::size_t>(points));
  for (int i = 0; i < points; ++i)
    v[static_cast<std::size_t>(i)] = kEndMl * i / (points - 1);
  return v;
}

// The same number of points with uneven steps (each 0.5-1.5 times the mean),
// which takes the general path of the local fits.
std::vector<double> uneven_grid(int points, std::mt19937_64& rng) {
  std::uniform_real_distribution<double> factor(0.5, 1.5);
  std::vector<double> v{0.0};
  for (int i = 1; i < points; ++i)
    v.push_back(v.back() + factor(rng));
  for (double& x : v)
    x *= kEndMl / v.back();
  return v;
}

Curve make(const std::vector<double>& v, std::vector<double> s, SignalKind kind) {
  CurveColumns c;
  c.volume_ml = v;
  c.signal = std::move(s);
  c.kind = kind;
  c.sample_volume_ml = kSampleMl;
  return Curve::from_columns(std::move(c)).value();
}

// Calcium-EDTA at pH 10 (K' = 0.30 x 10^10.65, Harris 8th ed., recalled from
// memory), Nernst slope 59.16/2 mV, 0.2 mV noise, equivalence 9-11 mL.
std::vector<Curve> potential_curves(int points, bool uneven = false) {
  std::vector<Curve> curves;
  for (int c = 0; c < kCurvesPerSize; ++c) {
    std::mt19937_64 rng(static_cast<std::uint64_t>(1000 * points + c));
    const auto v = uneven ? uneven_grid(points, rng) : grid(points);
    const double ve = std::uniform_real_distribution<double>(9.0, 11.0)(rng);
    const auto t = titration(0.01, ve, 0.30 * std::pow(10.0, 10.65));
    std::normal_distribution<double> noise(0.0, 0.2);
    std::vector<double> e;
    for (double x : v)
      e.push_back(kElectrodeZeroMv - 29.58 * veq::chemistry::p_metal(t, x) + noise(rng));
    curves.push_back(make(v, std::move(e), SignalKind::potential_mv));
  }
  return curves;
}

// A photometric titration: chelate absorbs 100, metal 10 L/(mol cm)
// (invented demo values), K' = 10^8, absorbance noise 0.001.
std::vector<Curve> photometric_curves(int points) {
  std::vector<Curve> curves;
  const auto v = grid(points);
  for (int c = 0; c < kCurvesPerSize; ++c) {
    std::mt19937_64 rng(static_cast<std::uint64_t>(2000 * points + c));
    const double ve = std::uniform_real_distribution<double>(6.0, 9.0)(rng);
    const auto t = titration(0.002, ve, 1e8);
    std::normal_distribution<double> noise(0.0, 0.001);
    std::vector<double> a;
    for (double x : v) {
      const double total = t.metal_conc_mol_per_l * kSampleMl / (kSampleMl + x);
      const double free = veq::chemistry::free_metal_mol_per_l(t, x);
      a.push_back(10.0 * free + 100.0 * (total - free) + noise(rng));
    }
    curves.push_back(make(v, std::move(a), SignalKind::absorbance));
  }
  return curves;
}

// Equivalence potential for the crossing level: pCa at equivalence for the
// middle of the range (10 mL), as a lab would preset it.
double crossing_level_mv() {
  const auto t = titration(0.01, 10.0, 0.30 * std::pow(10.0, 10.65));
  return kElectrodeZeroMv - 29.58 * veq::chemistry::p_metal(t, 10.0);
}

void BM_Derivative(benchmark::State& state) {
  const auto curves = potential_curves(static_cast<int>(state.range(0)));
  std::size_t i = 0;
  for (auto _ : state) {
    auto ev = veq::detection::find_endpoints_by_derivative(curves[i++ % curves.size()]);
    benchmark::DoNotOptimize(ev);
  }
  state.SetItemsProcessed(state.iterations());
  state.counters["curves_per_s"] =
      benchmark::Counter(static_cast<double>(state.iterations()), benchmark::Counter::kIsRate);
}

void BM_DerivativeUnevenSteps(benchmark::State& state) {
  const auto curves = potential_curves(static_cast<int>(state.range(0)), true);
  std::size_t i = 0;
  for (auto _ : state) {
    auto ev = veq::detection::find_endpoints_by_derivative(curves[i++ % curves.size()]);
    benchmark::DoNotOptimize(ev);
  }
  state.SetItemsProcessed(state.iterations());
  state.counters["curves_per_s"] =
      benchmark::Counter(static_cast<double>(state.iterations()), benchmark::Counter::kIsRate);
}

void BM_Segments(benchmark::State& state) {
  const auto curves = photometric_curves(static_cast<int>(state.range(0)));
  std::size_t i = 0;
  for (auto _ : state) {
    auto ev = veq::detection::find_endpoints_by_segments(curves[i++ % curves.size()]);
    benchmark::DoNotOptimize(ev);
  }
  state.SetItemsProcessed(state.iterations());
  state.counters["curves_per_s"] =
      benchmark::Counter(static_cast<double>(state.iterations()), benchmark::Counter::kIsRate);
}

void BM_Crossing(benchmark::State& state) {
  const auto curves = potential_curves(static_cast<int>(state.range(0)));
  veq::detection::CrossingOptions options;
  options.level = crossing_level_mv();
  std::size_t i = 0;
  for (auto _ : state) {
    auto ev = veq::detection::find_endpoints_by_crossing(curves[i++ % curves.size()], options);
    benchmark::DoNotOptimize(ev);
  }
  state.SetItemsProcessed(state.iterations());
  state.counters["curves_per_s"] =
      benchmark::Counter(static_cast<double>(state.iterations()), benchmark::Counter::kIsRate);
}

BENCHMARK(BM_Derivative)->Arg(50)->Arg(200)->Arg(1000);
BENCHMARK(BM_DerivativeUnevenSteps)->Arg(50)->Arg(200)->Arg(1000);
BENCHMARK(BM_Segments)->Arg(50)->Arg(200)->Arg(1000);
BENCHMARK(BM_Crossing)->Arg(50)->Arg(200)->Arg(1000);

// One file per method and size: a header line "volumes", then one line per
// curve: the signals, then the endpoint this program found (or nan).
void write_set(const std::string& path, const std::vector<Curve>& curves,
               const std::vector<double>& endpoints, double level) {
  std::ofstream out(path);
  out.precision(17);
  out << "level " << level << "\n";
  for (double x : curves.front().volume_ml())
    out << x << ' ';
  out << "\n";
  for (std::size_t c = 0; c < curves.size(); ++c) {
    for (double s : curves[c].signal())
      out << s << ' ';
    out << endpoints[c] << "\n";
  }
}

template <typename F>
std::vector<double> endpoints_of(const std::vector<Curve>& curves, F evaluate) {
  std::vector<double> out;
  for (const Curve& c : curves) {
    const auto ev = evaluate(c);
    out.push_back(ev.endpoints.empty() ? std::nan("") : ev.endpoints.front().volume_ml);
  }
  return out;
}

void write_curves(const std::string& dir) {
  veq::detection::CrossingOptions crossing;
  crossing.level = crossing_level_mv();
  for (int points : {50, 200, 1000}) {
    const auto potential = potential_curves(points);
    const auto photometric = photometric_curves(points);
    write_set(dir + "/derivative_" + std::to_string(points) + ".txt", potential,
              endpoints_of(
                  potential,
                  [](const Curve& c) { return veq::detection::find_endpoints_by_derivative(c); }),
              0.0);
    write_set(
        dir + "/segments_" + std::to_string(points) + ".txt", photometric,
        endpoints_of(photometric,
                     [](const Curve& c) { return veq::detection::find_endpoints_by_segments(c); }),
        0.0);
    write_set(dir + "/crossing_" + std::to_string(points) + ".txt", potential,
              endpoints_of(potential,
                           [&](const Curve& c) {
                             return veq::detection::find_endpoints_by_crossing(c, crossing);
                           }),
              crossing.level);
  }
}

}  // namespace

int main(int argc, char** argv) {
  std::vector<char*> rest;
  for (int i = 0; i < argc; ++i) {
    if (std::strncmp(argv[i], "--write-curves=", 15) == 0) {
      write_curves(argv[i] + 15);
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
