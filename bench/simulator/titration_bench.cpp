// Simulated 100-point titrations per second in virtual time on one core
// (target: at least 1,000). One titration: a fresh SimulatedBench for the
// scenario, then 100 doses of 0.1 mL, each followed by one potential reading,
// all through the real drivers' clients (BuretteClient with its status polls,
// PotentialSensorClient) over the in-memory transport, in virtual time.
//
// Variants:
//   OneToOne       the demo scenario: the exact 1:1 closed form
//   General        calcium and magnesium by the general equilibrium engine
//                  with a magnesium interferent on the calcium electrode
//   Replay         a stored 201-point curve served as the electrode
//   DevicesOnly    the 1:1 demo without the protocol: doses booked and
//                  potentials computed directly (the simulator's own cost)
// Counter titrations_per_s: 100-point titrations per second of CPU;
// lines_per_titration: protocol lines (requests and replies) per titration.
//
// Checksum: the protocol's CRC-16/CCITT of one 48-byte line as
// drivers/native_protocol.cpp computes it (by a 256-entry table). Every line
// is checksummed twice (sent and received): lines_per_titration x 2 x this
// is its share of a titration.
#include <benchmark/benchmark.h>

#include <array>
#include <cstdint>
#include <stdexcept>
#include <string>
#include <vector>

#include "drivers/burette_client.hpp"
#include "drivers/device_link.hpp"
#include "drivers/native_protocol.hpp"
#include "drivers/sensor_client.hpp"
#include "simulator/bench.hpp"
#include "simulator/builtin_scenarios.hpp"

namespace {

using veq::simulator::Scenario;
using veq::simulator::SimulatedBench;

Scenario demo() {
  auto s = veq::simulator::parse_scenario(veq::simulator::builtin_scenario("demo_calcium"), "demo");
  if (!s)
    throw std::runtime_error(s.error().message);
  return *s;
}

Scenario general() {
  auto s = veq::simulator::parse_scenario(
      R"({"seed": 5, "titrant": {"name": "EDTA", "label_conc_mol_per_l": 0.05},
          "electrode": {"metal": "Ca", "interferents": [{"metal": "Mg", "coefficient": 0.01}]},
          "chemistry": {"sample_volume_ml": 25.0,
            "metals": [{"name": "Ca", "conc_mol_per_l": 0.01}, {"name": "Mg", "conc_mol_per_l": 0.01}],
            "ph": 10.0, "buffer": {"name": "ammonia", "total_mol_per_l": 0.1},
            "titrant": {"name": "EDTA", "conc_mol_per_l": 0.05}}})",
      "general");
  if (!s)
    throw std::runtime_error(s.error().message);
  return *s;
}

Scenario replay() {
  Scenario s = demo();
  std::vector<double> v, e;
  for (int i = 0; i <= 200; ++i) {
    v.push_back(0.1 * i);
    e.push_back(100.0 + 0.5 * i);
  }
  auto curve = veq::simulator::replay_from_columns(v, e);
  s.replay = *curve;
  return s;
}

/// Counts the lines a host writes and reads (for lines_per_titration).
class CountingLine final : public veq::drivers::Transport {
 public:
  CountingLine(veq::drivers::Transport& inner, long& lines) : inner_(inner), lines_(lines) {}
  std::string describe() const override { return inner_.describe(); }
  veq::Result<void> write_all(std::string_view bytes, std::chrono::milliseconds t) override {
    ++lines_;
    return inner_.write_all(bytes, t);
  }
  veq::Result<std::string> read_line(std::chrono::milliseconds t) override {
    ++lines_;
    return inner_.read_line(t);
  }
  void discard_input() override { inner_.discard_input(); }
  std::chrono::nanoseconds deadline_now() const override { return inner_.deadline_now(); }

 private:
  veq::drivers::Transport& inner_;
  long& lines_;
};

void titrate_through_clients(benchmark::State& state, const Scenario& scenario) {
  // Once, outside the timing: how many lines one titration exchanges.
  long lines = 0;
  {
    veq::drivers::VirtualClock clock;
    SimulatedBench bench(scenario, clock);
    CountingLine bl(bench.burette_line(), lines);
    CountingLine el(bench.electrode_line(), lines);
    veq::drivers::DeviceLink b(bl, clock, "burette");
    veq::drivers::DeviceLink e(el, clock, "electrode");
    veq::drivers::BuretteClient burette(b);
    veq::drivers::PotentialSensorClient sensor(e);
    for (int i = 0; i < 100; ++i) {
      if (!burette.dose(0.1, 40.0) || !sensor.read())
        state.SkipWithError("titration failed");
    }
  }
  state.counters["lines_per_titration"] = static_cast<double>(lines);
  double sink = 0.0;
  for (auto _ : state) {
    veq::drivers::VirtualClock clock;
    SimulatedBench bench(scenario, clock);
    veq::drivers::DeviceLink b(bench.burette_line(), clock, "burette");
    veq::drivers::DeviceLink e(bench.electrode_line(), clock, "electrode");
    veq::drivers::BuretteClient burette(b);
    veq::drivers::PotentialSensorClient sensor(e);
    for (int i = 0; i < 100; ++i) {
      if (!burette.dose(0.1, 40.0))
        state.SkipWithError("dose failed");
      auto r = sensor.read();
      if (!r)
        state.SkipWithError("read failed");
      sink += r ? r->potential_mv : 0.0;
    }
  }
  benchmark::DoNotOptimize(sink);
  state.counters["titrations_per_s"] =
      benchmark::Counter(static_cast<double>(state.iterations()), benchmark::Counter::kIsRate);
}

void OneToOne(benchmark::State& state) {
  titrate_through_clients(state, demo());
}
void General(benchmark::State& state) {
  titrate_through_clients(state, general());
}
void Replay(benchmark::State& state) {
  titrate_through_clients(state, replay());
}

void DevicesOnly(benchmark::State& state) {
  const Scenario scenario = demo();
  double sink = 0.0;
  for (auto _ : state) {
    veq::drivers::VirtualClock clock;
    SimulatedBench bench(scenario, clock);
    for (int i = 0; i < 100; ++i)
      sink += bench.electrode().equilibrium_potential_mv(0.1 * (i + 1));
  }
  benchmark::DoNotOptimize(sink);
  state.counters["titrations_per_s"] =
      benchmark::Counter(static_cast<double>(state.iterations()), benchmark::Counter::kIsRate);
}

constexpr char kLine[] = "12 ok state=idle delivered_ml=1.2345 cylinder_ml=18.7655 fault=none ";

void Checksum(benchmark::State& state) {
  const std::string line(kLine, 48);
  unsigned sink = 0;
  for (auto _ : state) {
    benchmark::DoNotOptimize(line.data());
    sink += veq::drivers::protocol::crc16_ccitt(line);
  }
  benchmark::DoNotOptimize(sink);
}

BENCHMARK(Checksum);
BENCHMARK(OneToOne)->Unit(benchmark::kMicrosecond);
BENCHMARK(General)->Unit(benchmark::kMicrosecond);
BENCHMARK(Replay)->Unit(benchmark::kMicrosecond);
BENCHMARK(DevicesOnly)->Unit(benchmark::kMicrosecond);

}  // namespace

BENCHMARK_MAIN();
