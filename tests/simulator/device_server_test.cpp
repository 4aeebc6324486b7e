// Virtual instruments on real lines: pseudo-terminals (serial ports) and TCP
// listeners on 127.0.0.1 (a serial-to-network converter), served on one
// io_context. A pulled line in every role, reconnecting over TCP with the
// stop sent first, streamed readings on a timer, and 16 instruments driven at
// once.
#include <gtest/gtest.h>

#include <atomic>
#include <chrono>
#include <thread>

#include "drivers/auxiliary_doser_client.hpp"
#include "drivers/balance_client.hpp"
#include "drivers/burette_client.hpp"
#include "drivers/connection.hpp"
#include "drivers/photometer_client.hpp"
#include "drivers/profile_link.hpp"
#include "drivers/sample_changer_client.hpp"
#include "drivers/sensor_client.hpp"
#include "drivers/stirrer_client.hpp"
#include "simulator/bench.hpp"
#include "simulator/builtin_scenarios.hpp"
#include "simulator/device_server.hpp"
#include "simulator/profile_device.hpp"

namespace veq::simulator {
namespace {

using namespace std::chrono_literals;

/// Fast enough that doses take milliseconds, slow enough that the host's
/// polls stay far inside the devices' host-silence stop.
constexpr double kDeviceServerTimeScale = 20.0;

Scenario device_server_scenario() {
  auto s = parse_scenario(builtin_scenario("demo_calcium"), "demo");
  EXPECT_TRUE(s.has_value());
  return *s;
}

std::unique_ptr<drivers::Transport> open(const std::string& connection) {
  auto t = drivers::open_transport(connection);
  EXPECT_TRUE(t.has_value()) << connection << ": " << (t ? "" : t.error().message);
  return t ? std::move(t).value() : nullptr;
}

drivers::LinkOptions quick() {
  drivers::LinkOptions o;
  o.reply_timeout = 300ms;  // real time; an exchange on a local line takes well under 1 ms
  return o;
}

/// Served devices must outlive the serving thread (DeviceServer's contract),
/// but they are built on the server's clock and so declared after it.
/// Declared after the devices, this stops the server first when a test ends,
/// also after a failed ASSERT (ThreadSanitizer saw the serving thread answer
/// devices that were being destroyed).
class StopFirst {
 public:
  explicit StopFirst(DeviceServer& server) : server_(server) {}
  ~StopFirst() { server_.stop(); }
  StopFirst(const StopFirst&) = delete;
  StopFirst& operator=(const StopFirst&) = delete;

 private:
  DeviceServer& server_;
};

TEST(DeviceServer, ElectrodeOverTcpOnLocalhost) {
  DeviceServer server(kDeviceServerTimeScale);
  SimulatedBench bench(device_server_scenario(), server.clock());
  StopFirst stop_first(server);
  auto where = server.serve_on_tcp("electrode", bench.electrode());
  ASSERT_TRUE(where.has_value()) << where.error().message;
  EXPECT_EQ(where->rfind("tcp:127.0.0.1:", 0), 0u) << *where;
  server.run();
  auto line = open(*where);
  ASSERT_TRUE(line);
  drivers::ScaledClock clock(kDeviceServerTimeScale);
  drivers::DeviceLink link(*line, clock, "electrode", quick());
  drivers::PotentialSensorClient sensor(link);
  auto info = sensor.identify();
  ASSERT_TRUE(info.has_value()) << info.error().message;
  EXPECT_EQ(info->electrode, "calcium ion-selective, virtual");
  for (int i = 0; i < 20; ++i) {
    auto r = sensor.read();
    ASSERT_TRUE(r.has_value()) << r.error().message;
  }
  server.pull("electrode");
  auto pulled = sensor.read();
  ASSERT_FALSE(pulled.has_value());
  EXPECT_EQ(pulled.error().kind, ErrorKind::disconnected) << pulled.error().describe();
  EXPECT_TRUE(server.problems().empty());
}

TEST(DeviceServer, ReconnectingOverTcpStopsADoseFirst) {
  DeviceServer server(kDeviceServerTimeScale);
  SimulatedBench bench(device_server_scenario(), server.clock());
  StopFirst stop_first(server);
  auto where = server.serve_on_tcp("burette", bench.burette());
  ASSERT_TRUE(where.has_value());
  server.run();
  auto line = open(*where);
  ASSERT_TRUE(line);
  drivers::ScaledClock clock(kDeviceServerTimeScale);
  auto options = quick();
  options.reconnect.max_attempts = 3;
  options.reconnect.first_delay = 100ms;  // clock time: 5 ms of real time at 20x
  drivers::DeviceLink link(*line, clock, "burette", options);
  drivers::BuretteClient burette(link);
  ASSERT_TRUE(burette.identify().has_value());
  ASSERT_TRUE(burette.arm_host_silence_stop().has_value());
  ASSERT_TRUE(burette.start_dose(5.0, 10.0).has_value());  // 30 s of device time
  server.pull("burette");  // the converter drops the connection mid-dose
  auto s = burette.status();
  ASSERT_FALSE(s.has_value());
  EXPECT_EQ(s.error().kind, ErrorKind::disconnected);
  EXPECT_NE(s.error().message.find("'stop' was sent first"), std::string::npos)
      << s.error().message;
  EXPECT_NE(s.error().message.find("stop confirmed"), std::string::npos) << s.error().message;
  bool moving = true;
  std::string last_stop;
  server.with_devices([&] {
    moving = bench.burette().moving();
    last_stop = bench.burette().last_stop();
  });
  EXPECT_FALSE(moving);
  EXPECT_EQ(last_stop, "host");
  EXPECT_EQ(link.reconnections(), 1);
  // Not moving any more: the next exchanges are ordinary.
  auto after = burette.status();
  ASSERT_TRUE(after.has_value()) << after.error().message;
  EXPECT_EQ(after->state, drivers::BuretteState::idle);
}

TEST(DeviceServer, AConverterThatRefusesEveryConnectionEndsInBoundedTime) {
  DeviceServer server(kDeviceServerTimeScale);
  SimulatedBench bench(device_server_scenario(), server.clock());
  StopFirst stop_first(server);
  auto where = server.serve_on_tcp("stirrer", bench.stirrer());
  ASSERT_TRUE(where.has_value());
  server.run();
  auto line = open(*where);
  ASSERT_TRUE(line);
  drivers::ScaledClock clock(kDeviceServerTimeScale);
  auto options = quick();
  options.reconnect.max_attempts = 3;
  drivers::DeviceLink link(*line, clock, "stirrer", options);
  drivers::StirrerClient stirrer(link);
  ASSERT_TRUE(stirrer.identify().has_value());
  server.refuse_connections("stirrer", true);
  auto r = stirrer.status();
  ASSERT_FALSE(r.has_value());
  EXPECT_EQ(r.error().kind, ErrorKind::disconnected) << r.error().describe();
}

TEST(DeviceServer, APulledLineInEveryRoleIsDisconnected) {
  DeviceServer server(kDeviceServerTimeScale);
  SimulatedBench bench(device_server_scenario(), server.clock());
  StopFirst stop_first(server);
  const std::vector<std::pair<std::string, VirtualDevice*>> devices = {
      {"burette", &bench.burette()},       {"electrode", &bench.electrode()},
      {"doser", &bench.auxiliary_doser()}, {"photometer", &bench.photometer()},
      {"balance", &bench.balance()},       {"stirrer", &bench.stirrer()},
      {"changer", &bench.sample_changer()}};
  std::vector<std::string> ports;
  for (const auto& [name, device] : devices) {
    auto where = server.serve_on_pseudo_terminal(name, *device);
    ASSERT_TRUE(where.has_value()) << where.error().message;
    ports.push_back(*where);
  }
  server.run();
  drivers::ScaledClock clock(kDeviceServerTimeScale);
  std::vector<std::unique_ptr<drivers::Transport>> lines;
  std::vector<std::unique_ptr<drivers::DeviceLink>> links;
  for (std::size_t i = 0; i < devices.size(); ++i) {
    lines.push_back(open(ports[i]));
    ASSERT_TRUE(lines.back());
    links.push_back(
        std::make_unique<drivers::DeviceLink>(*lines.back(), clock, devices[i].first, quick()));
  }
  drivers::BuretteClient burette(*links[0]);
  drivers::PotentialSensorClient sensor(*links[1]);
  drivers::AuxiliaryDoserClient doser(*links[2]);
  drivers::PhotometerClient photometer(*links[3]);
  drivers::BalanceClient balance(*links[4]);
  drivers::StirrerClient stirrer(*links[5]);
  drivers::SampleChangerClient changer(*links[6]);
  // Each role identifies itself over its serial port...
  ASSERT_TRUE(burette.identify().has_value());
  ASSERT_TRUE(sensor.identify().has_value());
  ASSERT_TRUE(doser.identify().has_value());
  ASSERT_TRUE(photometer.identify().has_value());
  ASSERT_TRUE(balance.identify().has_value());
  ASSERT_TRUE(stirrer.identify().has_value());
  ASSERT_TRUE(changer.identify().has_value());
  // ... the doser is mid-dose when every cable is pulled ...
  ASSERT_TRUE(doser.start_dose(drivers::Reagent::buffer, 5.0, 1.0).has_value());
  for (const auto& [name, device] : devices)
    server.pull(name);
  // ... and every role ends with the line named as the reason.
  std::vector<Error> errors;
  auto keep = [&](const auto& r) {
    ASSERT_FALSE(r.has_value());
    errors.push_back(r.error());
  };
  keep(burette.status());
  keep(sensor.read());
  keep(doser.wait_until_idle(300.0));
  keep(photometer.read());
  keep(balance.read());
  keep(stirrer.status());
  keep(changer.status());
  ASSERT_EQ(errors.size(), devices.size());
  for (std::size_t i = 0; i < errors.size(); ++i) {
    EXPECT_EQ(errors[i].kind, ErrorKind::disconnected) << errors[i].describe();
    EXPECT_NE(errors[i].message.find(devices[i].first + " on " + ports[i]), std::string::npos)
        << errors[i].message;
  }
  EXPECT_TRUE(doser.halted());
  // The doser cannot hear its stop any more; its host-silence stop (10 s of
  // device time by default: half a second here) ends the dose by itself.
  std::this_thread::sleep_for(700ms);
  bool moving = true;
  server.with_devices([&] { moving = bench.auxiliary_doser().moving(); });
  EXPECT_FALSE(moving);
}

TEST(DeviceServer, StreamedReadingsOnATimerThroughAProfile) {
  DeviceServer server(kDeviceServerTimeScale);
  Scenario scenario = device_server_scenario();
  SimulatedBench bench(scenario, server.clock());
  auto profile = drivers::profile::load_profile(std::string(VEQ_SOURCE_DIR) +
                                                "/drivers/profiles/lantern_meter.profile");
  ASSERT_TRUE(profile.has_value());
  ProfileSpeakingDevice meter(*profile, bench.electrode());
  StopFirst stop_first(server);
  auto where = server.serve_on_pseudo_terminal("meter", meter);
  ASSERT_TRUE(where.has_value());
  server.run();
  auto line = open(*where);
  ASSERT_TRUE(line);
  drivers::ScaledClock clock(kDeviceServerTimeScale);
  auto link = drivers::ProfileLink::open(*line, clock, "meter", *profile, quick());
  ASSERT_TRUE(link.has_value());
  drivers::PotentialSensorClient sensor(**link);
  ASSERT_TRUE(sensor.identify().has_value());
  // 100 ms of device time is 5 ms of real time at 20x.
  ASSERT_TRUE(sensor.start_streaming(100ms).has_value());
  for (int i = 0; i < 10; ++i) {
    auto r = sensor.next_streamed(2000ms);
    ASSERT_TRUE(r.has_value()) << r.error().message;
    EXPECT_NEAR(r->temperature_c, 25.0, 1e-9);
  }
  ASSERT_TRUE(sensor.stop_streaming().has_value());
  EXPECT_TRUE(meter.problems().empty());
}

TEST(DeviceServer, SixteenInstrumentsDrivenAtOnce) {
  // Sixteen benches' electrodes and burettes on one io_context (one serving
  // thread); sixteen hosts, each on its own thread with its own transport,
  // as sixteen titrations would run.
  constexpr int kInstruments = 16;
  constexpr int kReadings = 25;
  DeviceServer server(kDeviceServerTimeScale);
  std::vector<std::unique_ptr<SimulatedBench>> benches;
  StopFirst stop_first(server);
  std::vector<std::string> ports;
  for (int i = 0; i < kInstruments; ++i) {
    Scenario s = device_server_scenario();
    s.seed = static_cast<std::uint64_t>(100 + i);
    benches.push_back(std::make_unique<SimulatedBench>(s, server.clock()));
    auto where =
        i % 2 == 0 ? server.serve_on_pseudo_terminal("meter" + std::to_string(i),
                                                     benches.back()->electrode())
                   : server.serve_on_tcp("meter" + std::to_string(i), benches.back()->electrode());
    ASSERT_TRUE(where.has_value()) << where.error().message;
    ports.push_back(*where);
  }
  server.run();
  std::atomic<int> good{0};
  std::vector<std::string> failures(kInstruments);
  std::vector<std::thread> hosts;
  for (int i = 0; i < kInstruments; ++i) {
    hosts.emplace_back([&, i] {
      auto t = drivers::open_transport(ports[static_cast<std::size_t>(i)]);
      if (!t) {
        failures[static_cast<std::size_t>(i)] = t.error().message;
        return;
      }
      drivers::ScaledClock clock(kDeviceServerTimeScale);
      drivers::LinkOptions options;
      options.reply_timeout = 2000ms;  // sixteen threads on two cores: be patient
      drivers::DeviceLink link(**t, clock, "meter", options);
      drivers::PotentialSensorClient sensor(link);
      for (int k = 0; k < kReadings; ++k) {
        auto r = sensor.read();
        if (!r) {
          failures[static_cast<std::size_t>(i)] = r.error().message;
          return;
        }
      }
      ++good;
    });
  }
  for (auto& h : hosts)
    h.join();
  for (int i = 0; i < kInstruments; ++i)
    EXPECT_TRUE(failures[static_cast<std::size_t>(i)].empty()) << i << ": " << failures[i];
  EXPECT_EQ(good.load(), kInstruments);
  EXPECT_TRUE(server.problems().empty());
}

}  // namespace
}  // namespace veq::simulator
