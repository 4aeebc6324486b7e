// Request/reply round trip over a pseudo-terminal: veq's whole stack (device
// client, DeviceLink, serial transport, the simulator's line server and
// virtual burette) against a bare Boost.Asio echo over the same kind of
// pseudo-terminal, in the same run. Target: veq's median within 2x the bare
// echo's.
//
// Every exchange is timed; the counters give the median and the 99th
// percentile in microseconds, and the summary after the table the ratios.
// On a machine busy with other work the scheduler's wake-up latency swamps
// both (medians of 100-200 us, ratios near 1); quote figures from a quiet run.
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
#include <boost/asio/post.hpp>
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

/// Iterations (each one exchange of every kind): enough for a stable 99th
/// percentile (200 samples beyond it), few enough to finish in a few seconds.
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

/// The bare baseline: a thread echoes every line on the master side of a
/// pseudo-terminal with Boost.Asio; the host writes a line on the serial port
/// and reads it back. The line is a real request of the same length as veq's
/// status request.
class BareEcho {
 public:
  bool start(benchmark::State& state) {
    auto pty = veq::drivers::PseudoTerminal::open();
    if (!pty) {
      state.SkipWithError(pty.error().message.c_str());
      return false;
    }
    pty_ = std::make_unique<veq::drivers::PseudoTerminal>(std::move(pty).value());
    master_ = std::make_unique<asio::posix::stream_descriptor>(device_io_, pty_->release_master());
    echo();
    device_ = std::thread([this] { device_io_.run(); });
    port_ = std::make_unique<asio::serial_port>(host_io_, pty_->slave_path());
    port_->set_option(asio::serial_port::baud_rate(115200));
    veq::drivers::protocol::Message request;
    request.sequence = 1;
    request.word = "status";
    line_ = veq::drivers::protocol::encode(request);
    return true;
  }
  ~BareEcho() {
    if (device_.joinable()) {
      asio::post(device_io_, [this] { master_->close(); });
      device_.join();
    }
  }
  /// One exchange, synchronous, as a bare Boost.Asio client would write it.
  void exchange() {
    asio::write(*port_, asio::buffer(line_));
    const std::size_t n = asio::read_until(*port_, host_buffer_, '\n');
    host_buffer_.consume(n);
  }

 private:
  void echo() {
    asio::async_read_until(*master_, device_buffer_, '\n',
                           [this](const boost::system::error_code& ec, std::size_t n) {
                             if (ec)
                               return;
                             std::string line(asio::buffers_begin(device_buffer_.data()),
                                              asio::buffers_begin(device_buffer_.data()) + n);
                             device_buffer_.consume(n);
                             asio::write(*master_, asio::buffer(line));
                             echo();
                           });
  }

  std::unique_ptr<veq::drivers::PseudoTerminal> pty_;
  asio::io_context device_io_;
  std::unique_ptr<asio::posix::stream_descriptor> master_;
  asio::streambuf device_buffer_;
  std::thread device_;
  asio::io_context host_io_;
  std::unique_ptr<asio::serial_port> port_;
  asio::streambuf host_buffer_;
  std::string line_;
};

/// veq's stack: device clients, DeviceLink (sequence numbers, checksums,
/// deadline), the serial transport, and the simulator's line server with the
/// virtual burette and electrode on their own thread.
struct VeqHost {
  std::unique_ptr<veq::simulator::PseudoTerminalBench> bench;
  veq::drivers::SteadyClock clock;
  std::unique_ptr<veq::drivers::Transport> burette_line, electrode_line;
  std::unique_ptr<veq::drivers::DeviceLink> burette_link, sensor_link;
  std::unique_ptr<veq::drivers::BuretteClient> burette;
  std::unique_ptr<veq::drivers::PotentialSensorClient> sensor;

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
    burette = std::make_unique<veq::drivers::BuretteClient>(*burette_link);
    sensor = std::make_unique<veq::drivers::PotentialSensorClient>(*sensor_link);
    return true;
  }
};

double microseconds_since(Clock::time_point start) {
  return std::chrono::duration<double, std::micro>(Clock::now() - start).count();
}

/// The three exchanges take turns within each iteration, so that all three
/// meet the same load from the rest of the machine: the ratios hold even on a
/// busy machine, where figures taken one after the other would not compare.
/// veq: the burette's status (the simplest exchange) and the electrode's
/// reading (which also solves the sample's equilibrium for the free metal).
void BM_RoundTripOverPseudoTerminal(benchmark::State& state) {
  BareEcho bare;
  VeqHost veq_host;
  if (!bare.start(state) || !veq_host.start(state))
    return;
  std::vector<double> bare_us, status_us, read_us;
  bare_us.reserve(kExchanges);
  status_us.reserve(kExchanges);
  read_us.reserve(kExchanges);
  for (auto _ : state) {
    auto start = Clock::now();
    bare.exchange();
    bare_us.push_back(microseconds_since(start));

    start = Clock::now();
    auto status = veq_host.burette->status();
    status_us.push_back(microseconds_since(start));

    start = Clock::now();
    auto reading = veq_host.sensor->read();
    read_us.push_back(microseconds_since(start));
    if (!status || !reading) {
      state.SkipWithError((status ? reading.error() : status.error()).message.c_str());
      return;
    }
  }
  g_bare = summarize(bare_us);
  g_status = summarize(status_us);
  g_read = summarize(read_us);
  state.counters["bare_median_us"] = g_bare.median_us;
  state.counters["bare_p99_us"] = g_bare.p99_us;
  state.counters["status_median_us"] = g_status.median_us;
  state.counters["status_p99_us"] = g_status.p99_us;
  state.counters["read_median_us"] = g_read.median_us;
  state.counters["read_p99_us"] = g_read.p99_us;
}

BENCHMARK(BM_RoundTripOverPseudoTerminal)->Iterations(kExchanges)->UseRealTime();

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
