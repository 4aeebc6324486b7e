// CPU used per instrument when 16 instruments are read 10 times per second
// each, as 16 titrations side by side would read their electrodes. Every
// instrument is a virtual electrode served by the simulator's DeviceServer
// (one io_context, one serving thread) over a pseudo-terminal or a TCP
// socket on 127.0.0.1; every host is a thread with its own transport, link
// and client, reading on a fixed 100 ms schedule for a fixed real-time window.
//
// CPU time comes from getrusage: RUSAGE_THREAD summed over the 16 host
// threads (veq's drivers: what a controller pays), and RUSAGE_SELF for the
// whole process (hosts plus the simulated devices' server). Figures are
// scaled to one instrument: percent of one core, and CPU microseconds per
// reading. Counters:
//   host_cpu_percent_per_instrument  drivers' CPU per instrument, % of a core
//   host_cpu_us_per_reading          drivers' CPU per reading, us
//   total_cpu_percent_per_instrument host + simulated device, % of a core
//   readings_per_s_per_instrument    achieved rate (target 10)
//   late_readings                    readings that missed their 100 ms slot
#include <benchmark/benchmark.h>
#include <sys/resource.h>

#include <atomic>
#include <chrono>
#include <memory>
#include <string>
#include <thread>
#include <vector>

#include "drivers/connection.hpp"
#include "drivers/device_link.hpp"
#include "drivers/profile_link.hpp"
#include "drivers/sensor_client.hpp"
#include "simulator/bench.hpp"
#include "simulator/builtin_scenarios.hpp"
#include "simulator/device_server.hpp"
#include "simulator/profile_device.hpp"

namespace {

using namespace std::chrono_literals;
using SteadyClock = std::chrono::steady_clock;

constexpr int kInstruments = 16;
constexpr auto kPeriod = 100ms;  // 10 readings per second

enum class Line { pseudo_terminal, tcp };
enum class Speech { native_polled, native_streamed, profile_polled };

double cpu_seconds(int who) {
  rusage u{};
  getrusage(who, &u);
  return static_cast<double>(u.ru_utime.tv_sec + u.ru_stime.tv_sec) +
         static_cast<double>(u.ru_utime.tv_usec + u.ru_stime.tv_usec) * 1e-6;
}

void instruments(benchmark::State& state, Line kind, Speech speech) {
  const auto window = std::chrono::milliseconds(state.range(0));
  auto scenario = veq::simulator::parse_scenario(veq::simulator::builtin_scenario("demo_calcium"),
                                                 "demo_calcium");
  auto profile = veq::drivers::profile::load_profile(std::string(VEQ_SOURCE_DIR) +
                                                     "/drivers/profiles/lantern_meter.profile");
  if (!scenario || !profile) {
    state.SkipWithError("cannot read the demo scenario or the Lantern profile");
    return;
  }
  for (auto _ : state) {
    veq::simulator::DeviceServer server(1.0);
    std::vector<std::unique_ptr<veq::simulator::SimulatedBench>> benches;
    std::vector<std::unique_ptr<veq::simulator::ProfileSpeakingDevice>> dialects;
    std::vector<std::string> where;
    for (int i = 0; i < kInstruments; ++i) {
      auto s = *scenario;
      s.seed = static_cast<std::uint64_t>(i + 1);
      benches.push_back(std::make_unique<veq::simulator::SimulatedBench>(s, server.clock()));
      veq::drivers::ByteDevice* device = &benches.back()->electrode();
      if (speech == Speech::profile_polled) {
        dialects.push_back(std::make_unique<veq::simulator::ProfileSpeakingDevice>(
            *profile, benches.back()->electrode()));
        device = dialects.back().get();
      }
      const std::string name = "meter" + std::to_string(i);
      auto w = kind == Line::tcp ? server.serve_on_tcp(name, *device)
                                 : server.serve_on_pseudo_terminal(name, *device);
      if (!w) {
        state.SkipWithError(w.error().message.c_str());
        return;
      }
      where.push_back(*w);
    }
    server.run();

    std::atomic<int> ready{0};
    std::atomic<bool> go{false};
    std::atomic<long> readings{0}, late{0}, failures{0};
    std::vector<double> host_cpu(kInstruments, 0.0);
    std::vector<std::thread> hosts;
    for (int i = 0; i < kInstruments; ++i) {
      hosts.emplace_back([&, i] {
        auto line = veq::drivers::open_transport(where[static_cast<std::size_t>(i)]);
        if (!line) {
          ++failures;
          ++ready;
          return;
        }
        veq::drivers::SteadyClock clock;
        std::unique_ptr<veq::drivers::DeviceChannel> link;
        if (speech == Speech::profile_polled) {
          auto opened = veq::drivers::ProfileLink::open(**line, clock, "meter", *profile);
          if (!opened) {
            ++failures;
            ++ready;
            return;
          }
          link = std::move(opened).value();
        } else {
          link = std::make_unique<veq::drivers::DeviceLink>(**line, clock, "meter");
        }
        veq::drivers::PotentialSensorClient sensor(*link);
        if (speech == Speech::native_streamed && !sensor.start_streaming(kPeriod)) {
          ++failures;
        }
        ++ready;
        while (!go.load())
          std::this_thread::sleep_for(1ms);
        const double cpu0 = cpu_seconds(RUSAGE_THREAD);
        const auto start = SteadyClock::now();
        auto next = start;
        while (SteadyClock::now() - start < window) {
          if (speech == Speech::native_streamed) {
            auto r = sensor.next_streamed(1000ms);
            if (!r)
              ++failures;
            else
              ++readings;
            continue;
          }
          next += kPeriod;
          auto r = sensor.read();
          if (!r)
            ++failures;
          else
            ++readings;
          if (SteadyClock::now() > next)
            ++late;
          std::this_thread::sleep_until(next);
        }
        host_cpu[static_cast<std::size_t>(i)] = cpu_seconds(RUSAGE_THREAD) - cpu0;
        if (speech == Speech::native_streamed)
          (void)sensor.stop_streaming();
      });
    }
    while (ready.load() < kInstruments)
      std::this_thread::sleep_for(1ms);
    const double process0 = cpu_seconds(RUSAGE_SELF);
    const auto t0 = SteadyClock::now();
    go = true;
    for (auto& h : hosts)
      h.join();
    const double elapsed_s = std::chrono::duration<double>(SteadyClock::now() - t0).count();
    const double process_cpu = cpu_seconds(RUSAGE_SELF) - process0;
    double hosts_cpu = 0.0;
    for (double c : host_cpu)
      hosts_cpu += c;
    server.stop();
    if (failures.load() > 0) {
      state.SkipWithError((std::to_string(failures.load()) + " readings failed").c_str());
      return;
    }
    state.counters["host_cpu_percent_per_instrument"] =
        100.0 * hosts_cpu / elapsed_s / kInstruments;
    state.counters["host_cpu_us_per_reading"] =
        1e6 * hosts_cpu / static_cast<double>(std::max(1L, readings.load()));
    state.counters["total_cpu_percent_per_instrument"] =
        100.0 * process_cpu / elapsed_s / kInstruments;
    state.counters["readings_per_s_per_instrument"] =
        static_cast<double>(readings.load()) / elapsed_s / kInstruments;
    state.counters["late_readings"] = static_cast<double>(late.load());
  }
}

// The window: 3 s of real time each (30 readings per instrument, 480 in all).
BENCHMARK_CAPTURE(instruments, pty_native_polled, Line::pseudo_terminal, Speech::native_polled)
    ->Arg(3000)
    ->Iterations(1)
    ->UseRealTime()
    ->Unit(benchmark::kMillisecond);
BENCHMARK_CAPTURE(instruments, tcp_native_polled, Line::tcp, Speech::native_polled)
    ->Arg(3000)
    ->Iterations(1)
    ->UseRealTime()
    ->Unit(benchmark::kMillisecond);
BENCHMARK_CAPTURE(instruments, pty_native_streamed, Line::pseudo_terminal, Speech::native_streamed)
    ->Arg(3000)
    ->Iterations(1)
    ->UseRealTime()
    ->Unit(benchmark::kMillisecond);
BENCHMARK_CAPTURE(instruments, pty_profile_polled, Line::pseudo_terminal, Speech::profile_polled)
    ->Arg(3000)
    ->Iterations(1)
    ->UseRealTime()
    ->Unit(benchmark::kMillisecond);

}  // namespace

BENCHMARK_MAIN();
