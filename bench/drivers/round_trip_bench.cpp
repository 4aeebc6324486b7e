// Request/reply round trip over a pseudo-terminal: veq's whole stack (device
// client, DeviceLink, serial transport, the simulator's line server and
// virtual burette) against a bare Boost.Asio echo over the same kind of
// pseudo-terminal, in the same run. Target: veq's median within 2x the bare
// echo's (docs: issue "serial line and screen").
//
// Each benchmark times every exchange and reports the median and the 99th
// percentile in microseconds (counters median_us, p99_us); the summary after
// the table gives the ratios.
#include <benchmark/benchmark.h>

#include <algorithm>
#include <array>
#include <chrono>
#include <cstdio>
#include <memory>
#include <string>
#include <thread>
#include <vector>

#include <boost/asio/io_context.hpp>
#include <boost/asio/posix/stream_descriptor.hpp>
#include <boost/asio/read_until.hpp>
#include <boost/asio/serial_port.hpp>
#include <boost/asio/streambuf.hpp>
#include <boost/asio/write.hpp>

#include "drivers/burette_client.hpp"
#include "drivers/clock.hpp"
#include "drivers/connection.hpp"
#include "drivers/device_link.hpp"
#include "drivers/native_protocol.hpp"
#include "drivers/pseudo_terminal.hpp"
#include "drivers/sensor_client.hpp"
#include "simulator/builtin_scenarios.hpp"
#include "simulator/pseudo_terminal_bench.hpp"

namespace {

namespace asio = boost::asio;
using Clock = std::chrono::steady_clock;

/// Exchanges per benchmark: enough for a stable 99th percentile (200 samples
/// beyond it), few enough to finish in about a second.
constexpr int kExchanges = 20000;

struct Figures {
  double median_us = 0.0;
  double p99_us = 0.0;
};
Figures g_bare, g_status, g_read;

Figures summarize(std::vector<double>& us) {
  std::sort(us.begin(), us.end());
  auto at = [&](double q) { return us[static_cast<std::size_t>(q * (us.size() - 1))]; };
  return {at(0.5), at(0.99)};
}

void report(benchmark::State& state, std::vector<double>& us, Figures* out) {
  *out = summarize(us);
  state.counters["median_us"] = out->median_us;
  state.counters["p99_us"] = out->p99_us;
}

/// The bare baseline: a thread echoes every line on the master side with
/// Boost.Asio; the host writes a line on the serial port and reads it back.
/// The line is a real request of the same length as veq's status request.
void BM_BareAsioEchoOverPseudoTerminal(benchmark::State& state) {
  auto pty = veq::drivers::PseudoTerminal::open();
  if (!pty) {
    state.SkipWithError(pty.error().message.c_str());
    return;
  }
  asio::io_context device_io;
  asio::posix::stream_descriptor master(device_io, pty->release_master());
  asio::streambuf device_buffer;
  std::function<void()> echo = [&] {
    asio::async_read_until(master, device_buffer, '\n',
                           [&](const boost::system::error_code& ec, std::size_t n) {
                             if (ec)
                               return;
                             std::string line(asio::buffers_begin(device_buffer.data()),
                                              asio::buffers_begin(device_buffer.data()) + n);
                             device_buffer.consume(n);
                             asio::write(master, asio::buffer(line));
                             echo();
                           });
  };
  echo();
  std::thread device([&] { device_io.run(); });

  asio::io_context host_io;
  asio::serial_port port(host_io, pty->slave_path());
  port.set_option(asio::serial_port::baud_rate(115200));
  veq::drivers::protocol::Message request;
  request.sequence = 1;
  request.word = "status";
  const std::string bytes = veq::drivers::protocol::encode(request);
  asio::streambuf host_buffer;
  std::vector<double> us;
  us.reserve(kExchanges);
  for (auto _ : state) {
    const auto start = Clock::now();
    asio::write(port, asio::buffer(bytes));
    const std::size_t n = asio::read_until(port, host_buffer, '\n');
    host_buffer.consume(n);
    us.push_back(std::chrono::duration<double, std::micro>(Clock::now() - start).count());
  }
  report(state, us, &g_bare);
  master.cancel();
  device_io.stop();
  device.join();
}

struct VeqHost {
  std::unique_ptr<veq::simulator::PseudoTerminalBench> bench;
  veq::drivers::SteadyClock clock;
  std::unique_ptr<veq::drivers::Transport> burette_line, electrode_line;
  std::unique_ptr<veq::drivers::DeviceLink> burette_link, sensor_link;

  bool start(benchmark::State& state) {
    auto scenario = veq::simulator::parse_scenario(veq::simulator::builtin_scenario("demo_calcium"),
                                                   "demo_calcium");
    auto started = veq::simulator::PseudoTerminalBench::start(*scenario);
    if (!started) {
      state.SkipWithError(started.error().message.c_str());
      return false;
    }
    bench = std::move(started).value();
    auto b = veq::drivers::open_transport(bench->burette_connection());
    auto e = veq::drivers::open_transport(bench->electrode_connection());
    if (!b || !e) {
      state.SkipWithError("cannot open the simulator's ports");
      return false;
    }
    burette_line = std::move(b).value();
    electrode_line = std::move(e).value();
    burette_link = std::make_unique<veq::drivers::DeviceLink>(*burette_line, clock, "burette");
    sensor_link = std::make_unique<veq::drivers::DeviceLink>(*electrode_line, clock, "electrode");
    return true;
  }
};

/// veq's stack for the simplest exchange: the burette's status, encoded with
/// a checksum, sent with a deadline timer, answered by the virtual burette
/// on the simulator's serving thread, parsed and checked.
void BM_VeqBuretteStatusOverPseudoTerminal(benchmark::State& state) {
  VeqHost host;
  if (!host.start(state))
    return;
  veq::drivers::BuretteClient burette(*host.burette_link);
  std::vector<double> us;
  us.reserve(kExchanges);
  for (auto _ : state) {
    const auto start = Clock::now();
    auto status = burette.status();
    us.push_back(std::chrono::duration<double, std::micro>(Clock::now() - start).count());
    if (!status) {
      state.SkipWithError(status.error().message.c_str());
      return;
    }
  }
  report(state, us, &g_status);
}

/// The same with the electrode's reading, which also solves the sample's
/// equilibrium for the free metal on every request.
void BM_VeqElectrodeReadOverPseudoTerminal(benchmark::State& state) {
  VeqHost host;
  if (!host.start(state))
    return;
  veq::drivers::PotentialSensorClient sensor(*host.sensor_link);
  std::vector<double> us;
  us.reserve(kExchanges);
  for (auto _ : state) {
    const auto start = Clock::now();
    auto reading = sensor.read();
    us.push_back(std::chrono::duration<double, std::micro>(Clock::now() - start).count());
    if (!reading) {
      state.SkipWithError(reading.error().message.c_str());
      return;
    }
  }
  report(state, us, &g_read);
}

BENCHMARK(BM_BareAsioEchoOverPseudoTerminal)->Iterations(kExchanges)->UseRealTime();
BENCHMARK(BM_VeqBuretteStatusOverPseudoTerminal)->Iterations(kExchanges)->UseRealTime();
BENCHMARK(BM_VeqElectrodeReadOverPseudoTerminal)->Iterations(kExchanges)->UseRealTime();

}  // namespace

int main(int argc, char** argv) {
  benchmark::Initialize(&argc, argv);
  if (benchmark::ReportUnrecognizedArguments(argc, argv))
    return 1;
  benchmark::RunSpecifiedBenchmarks();
  benchmark::Shutdown();
  if (g_bare.median_us > 0.0) {
    std::printf("\nround trip over a pseudo-terminal, median / 99th percentile (us):\n");
    std::printf("  bare Boost.Asio echo      %8.1f / %8.1f\n", g_bare.median_us, g_bare.p99_us);
    if (g_status.median_us > 0.0) {
      std::printf(
          "  veq burette status        %8.1f / %8.1f   (%.2fx / %.2fx the bare echo; "
          "target: median within 2x)\n",
          g_status.median_us, g_status.p99_us, g_status.median_us / g_bare.median_us,
          g_status.p99_us / g_bare.p99_us);
    }
    if (g_read.median_us > 0.0) {
      std::printf("  veq electrode reading     %8.1f / %8.1f   (%.2fx / %.2fx the bare echo)\n",
                  g_read.median_us, g_read.p99_us, g_read.median_us / g_bare.median_us,
                  g_read.p99_us / g_bare.p99_us);
    }
  }
  return 0;
}
