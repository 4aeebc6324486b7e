// The virtual burette and electrode served over pseudo-terminals, reached
// through the serial transport, DeviceLink and the real device clients; line
// faults over the real line; and the veq-sim executable as a process.
#include <fcntl.h>
#include <gtest/gtest.h>
#include <signal.h>
#include <spawn.h>
#include <sys/wait.h>
#include <termios.h>
#include <unistd.h>

#include <chrono>
#include <cmath>
#include <filesystem>
#include <fstream>
#include <map>
#include <thread>

#include "drivers/burette_client.hpp"
#include "drivers/clock.hpp"
#include "drivers/connection.hpp"
#include "drivers/device_link.hpp"
#include "drivers/native_protocol.hpp"
#include "drivers/photometer_client.hpp"
#include "drivers/profile_link.hpp"
#include "drivers/sensor_client.hpp"
#include "simulator/builtin_scenarios.hpp"
#include "simulator/pseudo_terminal_bench.hpp"

extern char** environ;

namespace veq::simulator {
namespace {

using namespace std::chrono_literals;

/// Fast enough that a dose takes tens of milliseconds, slow enough that the
/// host's status polls stay far inside the burette's host-silence stop.
constexpr double kPseudoTerminalBenchTimeScale = 50.0;

Scenario pseudo_terminal_bench_scenario() {
  auto s = parse_scenario(builtin_scenario("demo_calcium"), "demo");
  EXPECT_TRUE(s.has_value());
  return *s;
}

/// A host talking to one served bench, as `veq run` would.
struct PseudoTerminalBenchHost {
  drivers::ScaledClock clock{kPseudoTerminalBenchTimeScale};
  std::unique_ptr<drivers::Transport> burette_line, electrode_line;
  std::unique_ptr<drivers::DeviceLink> burette_link, sensor_link;
  std::unique_ptr<drivers::BuretteClient> burette;
  std::unique_ptr<drivers::PotentialSensorClient> sensor;

  /// reply_timeout: real time the host waits for a reply; short keeps the
  /// fault tests quick, yet far above a pseudo-terminal exchange (~0.1 ms).
  void connect(const PseudoTerminalBench& bench, std::chrono::milliseconds reply_timeout = 300ms) {
    auto b = drivers::open_transport(bench.burette_connection());
    auto e = drivers::open_transport(bench.electrode_connection());
    ASSERT_TRUE(b.has_value()) << b.error().message;
    ASSERT_TRUE(e.has_value()) << e.error().message;
    burette_line = std::move(b).value();
    electrode_line = std::move(e).value();
    drivers::LinkOptions options;
    options.reply_timeout = reply_timeout;
    burette_link = std::make_unique<drivers::DeviceLink>(*burette_line, clock, "burette", options);
    sensor_link =
        std::make_unique<drivers::DeviceLink>(*electrode_line, clock, "electrode", options);
    burette = std::make_unique<drivers::BuretteClient>(*burette_link);
    sensor = std::make_unique<drivers::PotentialSensorClient>(*sensor_link);
  }
};

std::unique_ptr<PseudoTerminalBench> start_bench(const Scenario& scenario) {
  PseudoTerminalBenchOptions options;
  options.time_scale = kPseudoTerminalBenchTimeScale;
  auto bench = PseudoTerminalBench::start(scenario, options);
  EXPECT_TRUE(bench.has_value()) << bench.error().message;
  return bench ? std::move(bench).value() : nullptr;
}

TEST(PseudoTerminalBench, ServesTwoDistinctPorts) {
  auto bench = start_bench(pseudo_terminal_bench_scenario());
  ASSERT_TRUE(bench);
  EXPECT_EQ(bench->burette_port().rfind("/dev/pts/", 0), 0u) << bench->burette_port();
  EXPECT_EQ(bench->electrode_port().rfind("/dev/pts/", 0), 0u) << bench->electrode_port();
  EXPECT_NE(bench->burette_port(), bench->electrode_port());
  EXPECT_EQ(bench->burette_connection(), "serial:" + bench->burette_port());
  EXPECT_EQ(bench->time_scale(), kPseudoTerminalBenchTimeScale);
}

TEST(PseudoTerminalBench, RefusesATimeScaleThatIsNotPositive) {
  PseudoTerminalBenchOptions options;
  options.time_scale = 0.0;
  auto bench = PseudoTerminalBench::start(pseudo_terminal_bench_scenario(), options);
  ASSERT_FALSE(bench.has_value());
  EXPECT_EQ(bench.error().kind, ErrorKind::invalid_input);
}

TEST(PseudoTerminalBench, DevicesAnswerThroughTheRealClientsOverSerialPorts) {
  auto bench = start_bench(pseudo_terminal_bench_scenario());
  ASSERT_TRUE(bench);
  PseudoTerminalBenchHost host;
  ASSERT_NO_FATAL_FAILURE(host.connect(*bench));

  auto info = host.burette->identify();
  ASSERT_TRUE(info.has_value()) << info.error().message;
  EXPECT_EQ(info->cylinder_ml, 20.0);  // demo_calcium.json
  auto sensor = host.sensor->identify();
  ASSERT_TRUE(sensor.has_value()) << sensor.error().message;
  EXPECT_EQ(sensor->electrode, "calcium ion-selective, virtual");

  // Before any titrant, the reading is the electrode's equilibrium potential
  // plus its 0.1 mV noise (demo_calcium.json): within 5 standard deviations.
  double expected_mv = 0.0;
  bench->with_bench(
      [&](SimulatedBench& b) { expected_mv = b.electrode().equilibrium_potential_mv(0.0); });
  auto reading = host.sensor->read();
  ASSERT_TRUE(reading.has_value()) << reading.error().message;
  EXPECT_NEAR(reading->potential_mv, expected_mv, 0.5);
  EXPECT_DOUBLE_EQ(reading->temperature_c, 25.0);

  // 0.5 mL at 10 mL/min: 3 s of device time, 60 ms of real time at 50x. The
  // counter moves in whole steps of 20 mL / 40000 = 0.5 uL, so 0.5 mL is exact.
  auto dosed = host.burette->dose(0.5, 10.0);
  ASSERT_TRUE(dosed.has_value()) << dosed.error().message;
  EXPECT_EQ(dosed->state, drivers::BuretteState::idle);
  EXPECT_NEAR(dosed->delivered_ml, 0.5, 1e-9);
  EXPECT_NEAR(dosed->cylinder_content_ml, 19.5, 1e-9);
  bool moving = true;
  double truly_delivered_ml = 0.0;
  bench->with_bench([&](SimulatedBench& b) {
    moving = b.burette().moving();
    truly_delivered_ml = b.burette().true_delivered_ml();
  });
  EXPECT_FALSE(moving);
  EXPECT_NEAR(truly_delivered_ml, 0.5, 1e-9);  // no systematic or random error in the demo
  EXPECT_TRUE(bench->problems().empty());
}

TEST(PseudoTerminalBench, AHostMayWriteAtOnceEvenWhileTheServingThreadIsBusy) {
  auto bench = start_bench(pseudo_terminal_bench_scenario());
  ASSERT_TRUE(bench);
  // The line is raw from start() on, before any host configures it: no echo,
  // no line editing, no signals, nothing added to or taken from the bytes.
  termios line{};
  const int fd = ::open(bench->burette_port().c_str(), O_RDWR | O_NOCTTY | O_NONBLOCK | O_CLOEXEC);
  ASSERT_GE(fd, 0) << bench->burette_port();
  const int got = ::tcgetattr(fd, &line);
  ::close(fd);
  ASSERT_EQ(got, 0);
  EXPECT_EQ(line.c_lflag & (ECHO | ECHONL | ICANON | ISIG | IEXTEN), 0u);
  EXPECT_EQ(line.c_oflag & OPOST, 0u);
  EXPECT_EQ(line.c_iflag & (ICRNL | INLCR | IGNCR | IXON | ISTRIP), 0u);

  // The request goes out while the serving thread runs something else (this
  // inspection), so it reaches the line before the bench reads: it waits in
  // the line and is answered, alone and unaltered, once the thread is free.
  auto opened = drivers::open_transport(bench->burette_connection());
  ASSERT_TRUE(opened.has_value()) << opened.error().message;
  drivers::Transport& host = **opened;
  drivers::protocol::Message request;
  request.word = "identify";
  request.sequence = 1;
  Result<void> sent;
  bench->with_bench(
      [&](SimulatedBench&) { sent = host.write_all(drivers::protocol::encode(request), 1000ms); });
  ASSERT_TRUE(sent.has_value()) << sent.error().message;
  // Not a speed limit: a bound so that a lost request fails rather than hangs.
  auto line_read = host.read_line(5000ms);
  ASSERT_TRUE(line_read.has_value()) << line_read.error().describe();
  auto reply = drivers::protocol::parse(*line_read);
  ASSERT_TRUE(reply.has_value()) << reply.error().message << " in '" << *line_read << "'";
  EXPECT_EQ(reply->word, "ok");
  EXPECT_EQ(reply->sequence, 1u);
  EXPECT_EQ(reply->find("role").value_or(""), "burette");
  EXPECT_TRUE(bench->problems().empty());
}

TEST(PseudoTerminalBench, SilentElectrodeIsATimeoutAndTheLineRecovers) {
  auto bench = start_bench(pseudo_terminal_bench_scenario());
  ASSERT_TRUE(bench);
  PseudoTerminalBenchHost host;
  ASSERT_NO_FATAL_FAILURE(host.connect(*bench, 150ms));
  bench->set_electrode_fault({FaultKind::silence, 0.0});
  const auto start = std::chrono::steady_clock::now();
  auto reading = host.sensor->read();
  const auto waited = std::chrono::steady_clock::now() - start;
  ASSERT_FALSE(reading.has_value());
  EXPECT_EQ(reading.error().kind, ErrorKind::timeout);
  EXPECT_NE(reading.error().message.find("electrode on serial:" + bench->electrode_port()),
            std::string::npos)
      << reading.error().message;
  EXPECT_NE(reading.error().message.find("('read')"), std::string::npos);
  // The host waited for its reply rather than giving up at once: 150 ms of
  // real time, as DeviceLink counts the deadline on the line's time base, not
  // on the run's scaled clock (where 150 ms are 3 ms of real time at 50x).
  EXPECT_GE(waited, 100ms);

  bench->set_electrode_fault({FaultKind::none, 0.0});
  auto again = host.sensor->read();
  ASSERT_TRUE(again.has_value()) << again.error().message;
}

TEST(PseudoTerminalBench, GarbageOnTheLineIsGarbledNeverANumber) {
  auto bench = start_bench(pseudo_terminal_bench_scenario());
  ASSERT_TRUE(bench);
  PseudoTerminalBenchHost host;
  ASSERT_NO_FATAL_FAILURE(host.connect(*bench));
  bench->set_electrode_fault({FaultKind::garbage, 0.0});
  // Noise bytes are random: each reply must be refused, whatever they are.
  for (int i = 0; i < 20; ++i) {
    auto reading = host.sensor->read();
    ASSERT_FALSE(reading.has_value()) << "noise read as " << reading->potential_mv << " mV";
    EXPECT_EQ(reading.error().kind, ErrorKind::garbled) << reading.error().describe();
  }
  bench->set_electrode_fault({FaultKind::none, 0.0});
  auto again = host.sensor->read();
  ASSERT_TRUE(again.has_value()) << again.error().message;
}

TEST(PseudoTerminalBench, PartialLineIsATimeoutThatSaysSoAndTheLineRecovers) {
  auto bench = start_bench(pseudo_terminal_bench_scenario());
  ASSERT_TRUE(bench);
  PseudoTerminalBenchHost host;
  ASSERT_NO_FATAL_FAILURE(host.connect(*bench, 150ms));
  bench->set_burette_fault({FaultKind::partial_line, 0.0});
  auto status = host.burette->status();
  ASSERT_FALSE(status.has_value());
  EXPECT_EQ(status.error().kind, ErrorKind::timeout);
  EXPECT_NE(status.error().message.find("an unfinished line of"), std::string::npos)
      << status.error().message;

  // The half line was dropped: the next reply parses on its own.
  bench->set_burette_fault({FaultKind::none, 0.0});
  auto again = host.burette->status();
  ASSERT_TRUE(again.has_value()) << again.error().message;
  EXPECT_EQ(again->state, drivers::BuretteState::idle);
}

TEST(PseudoTerminalBench, TheElectrodeStreamsOverItsPort) {
  auto bench = start_bench(pseudo_terminal_bench_scenario());
  ASSERT_TRUE(bench);
  PseudoTerminalBenchHost host;
  ASSERT_NO_FATAL_FAILURE(host.connect(*bench));
  // 100 ms of device time is 2 ms of real time at 50x.
  ASSERT_TRUE(host.sensor->start_streaming(100ms).has_value());
  for (int i = 0; i < 10; ++i) {
    auto r = host.sensor->next_streamed(300ms);
    ASSERT_TRUE(r.has_value()) << r.error().message;
    EXPECT_DOUBLE_EQ(r->temperature_c, 25.0);
  }
  ASSERT_TRUE(host.sensor->stop_streaming().has_value());
  EXPECT_TRUE(bench->problems().empty());
}

TEST(PseudoTerminalBench, PulledCableIsDisconnected) {
  auto bench = start_bench(pseudo_terminal_bench_scenario());
  ASSERT_TRUE(bench);
  PseudoTerminalBenchHost host;
  ASSERT_NO_FATAL_FAILURE(host.connect(*bench));
  auto before = host.burette->status();
  ASSERT_TRUE(before.has_value()) << before.error().describe();
  bench->disconnect();
  auto status = host.burette->status();
  ASSERT_FALSE(status.has_value());
  EXPECT_EQ(status.error().kind, ErrorKind::disconnected) << status.error().describe();
  auto reading = host.sensor->read();
  ASSERT_FALSE(reading.has_value());
  EXPECT_EQ(reading.error().kind, ErrorKind::disconnected) << reading.error().describe();
}

TEST(PseudoTerminalBench, AHostMayCloseItsPortAndOpenItAgain) {
  auto bench = start_bench(pseudo_terminal_bench_scenario());
  ASSERT_TRUE(bench);
  for (int session = 0; session < 3; ++session) {
    PseudoTerminalBenchHost host;
    ASSERT_NO_FATAL_FAILURE(host.connect(*bench));
    auto info = host.burette->identify();
    ASSERT_TRUE(info.has_value()) << "session " << session << ": " << info.error().message;
  }
}

TEST(PseudoTerminalBench, StopIsIdempotentAndClosesThePorts) {
  auto bench = start_bench(pseudo_terminal_bench_scenario());
  ASSERT_TRUE(bench);
  const std::string port = bench->burette_port();
  bench->stop();
  bench->stop();
  // Inspection still works, now on the caller's thread.
  bool moving = true;
  bench->with_bench([&](SimulatedBench& b) { moving = b.burette().moving(); });
  EXPECT_FALSE(moving);
  bench.reset();
  EXPECT_FALSE(std::filesystem::exists(port)) << port;
}

// ---- veq-sim as a process ----

std::map<std::string, std::string> read_key_values(const std::string& path) {
  std::map<std::string, std::string> out;
  std::ifstream in(path);
  std::string line;
  while (std::getline(in, line)) {
    const auto eq = line.find('=');
    if (eq != std::string::npos)
      out[line.substr(0, eq)] = line.substr(eq + 1);
  }
  return out;
}

pid_t spawn(const std::vector<std::string>& args) {
  std::vector<char*> argv;
  for (const auto& a : args)
    argv.push_back(const_cast<char*>(a.c_str()));
  argv.push_back(nullptr);
  pid_t pid = -1;
  if (posix_spawn(&pid, argv[0], nullptr, nullptr, argv.data(), environ) != 0)
    return -1;
  return pid;
}

/// Exit status of a child, or -1 if it did not end within the timeout.
int wait_exit(pid_t pid, std::chrono::milliseconds timeout) {
  const auto deadline = std::chrono::steady_clock::now() + timeout;
  while (std::chrono::steady_clock::now() < deadline) {
    int status = 0;
    if (waitpid(pid, &status, WNOHANG) == pid)
      return WIFEXITED(status) ? WEXITSTATUS(status) : 128 + WTERMSIG(status);
    std::this_thread::sleep_for(10ms);
  }
  kill(pid, SIGKILL);
  waitpid(pid, nullptr, 0);
  return -1;
}

const std::string kSimulator = std::string(VEQ_BINARY_DIR) + "/bin/veq-sim";

TEST(VeqSimProcess, WritesPortsServesAndStopsCleanlyOnSigterm) {
  const auto dir =
      std::filesystem::temp_directory_path() / ("veq-sim-test-" + std::to_string(::getpid()));
  std::filesystem::create_directories(dir);
  const std::string ports = (dir / "ports.txt").string();
  const pid_t pid = spawn({kSimulator, "--time-scale", "50", "--seed", "7", "--ports-file", ports});
  ASSERT_GT(pid, 0);
  const auto deadline = std::chrono::steady_clock::now() + 10s;
  while (!std::filesystem::exists(ports) && std::chrono::steady_clock::now() < deadline)
    std::this_thread::sleep_for(10ms);
  auto lines = read_key_values(ports);
  ASSERT_TRUE(lines.count("burette") && lines.count("electrode")) << "no port lines in " << ports;
  EXPECT_EQ(lines["time_scale"], "50");
  // 0.02000 mol/L x 25.0 mL / 0.0500 mol/L with no burette error (demo_calcium.json).
  EXPECT_EQ(lines["true_equivalence_ml"], "10.0000");

  {
    drivers::ScaledClock clock(50.0);
    auto b = drivers::open_transport("serial:" + lines["burette"]);
    auto e = drivers::open_transport("serial:" + lines["electrode"]);
    ASSERT_TRUE(b && e);
    drivers::DeviceLink burette_link(**b, clock, "burette");
    drivers::DeviceLink sensor_link(**e, clock, "electrode");
    drivers::BuretteClient burette(burette_link);
    drivers::PotentialSensorClient sensor(sensor_link);
    auto info = burette.identify();
    ASSERT_TRUE(info.has_value()) << info.error().message;
    auto reading = sensor.read();
    ASSERT_TRUE(reading.has_value()) << reading.error().message;
  }

  ASSERT_EQ(kill(pid, SIGTERM), 0);
  EXPECT_EQ(wait_exit(pid, 10s), 0);
  EXPECT_FALSE(std::filesystem::exists(ports)) << "the ports file is removed on exit";
  std::filesystem::remove_all(dir);
}

TEST(VeqSimProcess, ServesEveryInstrumentOverTcpWithTheBuretteOnItsProfile) {
  const auto dir =
      std::filesystem::temp_directory_path() / ("veq-sim-all-" + std::to_string(::getpid()));
  std::filesystem::create_directories(dir);
  const std::string ports = (dir / "ports.txt").string();
  const std::string profile =
      std::string(VEQ_SOURCE_DIR) + "/drivers/profiles/stonebridge_burette.profile";
  const pid_t pid = spawn({kSimulator, "--time-scale", "50", "--all-instruments", "--tcp",
                           "--burette-profile", profile, "--ports-file", ports});
  ASSERT_GT(pid, 0);
  const auto deadline = std::chrono::steady_clock::now() + 10s;
  while (!std::filesystem::exists(ports) && std::chrono::steady_clock::now() < deadline)
    std::this_thread::sleep_for(10ms);
  auto lines = read_key_values(ports);
  for (const char* name : {"burette", "electrode", "auxiliary_doser", "photometer", "balance",
                           "stirrer", "sample_changer"}) {
    ASSERT_TRUE(lines.count(name)) << name << " not in " << ports;
    EXPECT_EQ(lines[name].rfind("tcp:127.0.0.1:", 0), 0u) << lines[name];
  }
  {
    drivers::ScaledClock clock(50.0);
    auto b = drivers::open_transport(lines["burette"]);
    auto p = drivers::open_transport(lines["photometer"]);
    ASSERT_TRUE(b && p);
    auto parsed = drivers::profile::load_profile(profile);
    ASSERT_TRUE(parsed.has_value());
    auto burette_link = drivers::ProfileLink::open(**b, clock, "burette", *parsed);
    ASSERT_TRUE(burette_link.has_value());
    drivers::BuretteClient burette(**burette_link);
    auto info = burette.identify();
    ASSERT_TRUE(info.has_value()) << info.error().message;
    EXPECT_EQ(info->model, "Stonebridge PB-25 piston burette");
    drivers::DeviceLink photometer_link(**p, clock, "photometer");
    drivers::PhotometerClient photometer(photometer_link);
    auto reading = photometer.read();
    ASSERT_TRUE(reading.has_value()) << reading.error().message;
  }
  ASSERT_EQ(kill(pid, SIGTERM), 0);
  EXPECT_EQ(wait_exit(pid, 10s), 0);
  EXPECT_FALSE(std::filesystem::exists(ports));
  std::filesystem::remove_all(dir);
}

TEST(VeqSimProcess, RefusesABadTimeScale) {
  const pid_t pid = spawn({kSimulator, "--time-scale", "0"});
  ASSERT_GT(pid, 0);
  const int code = wait_exit(pid, 10s);
  EXPECT_NE(code, 0);
  EXPECT_NE(code, -1);
}

}  // namespace
}  // namespace veq::simulator
