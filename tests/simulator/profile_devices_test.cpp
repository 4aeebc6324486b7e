// Clients over device profiles: the invented Stonebridge burette and Lantern
// meter (drivers/profiles/) played by the simulator in their own dialects,
// in virtual time. A client over a profile must behave like one over veq's
// native protocol: the same values and the same Result errors.
#include <gtest/gtest.h>

#include <functional>
#include <memory>
#include <sstream>

#include "drivers/burette_client.hpp"
#include "drivers/profile_link.hpp"
#include "drivers/sensor_client.hpp"
#include "drivers/traffic_log.hpp"
#include "simulator/bench.hpp"
#include "simulator/builtin_scenarios.hpp"
#include "simulator/profile_device.hpp"

namespace veq::simulator {
namespace {

using namespace std::chrono_literals;

const std::string kProfiles = std::string(VEQ_SOURCE_DIR) + "/drivers/profiles/";

drivers::profile::Profile load(const std::string& name) {
  auto p = drivers::profile::load_profile(kProfiles + name);
  EXPECT_TRUE(p.has_value()) << (p ? "" : p.error().message);
  return p ? *p : drivers::profile::Profile{};
}

/// The demo sample on a burette built like the Stonebridge PB-25's facts.
Scenario stonebridge_scenario() {
  auto s = parse_scenario(builtin_scenario("demo_calcium"), "demo");
  EXPECT_TRUE(s.has_value());
  s->burette.cylinder_ml = 25.0;
  s->burette.steps_per_cylinder = 50000.0;
  s->burette.max_rate_ml_per_min = 30.0;
  s->burette.max_fill_rate_ml_per_min = 50.0;
  s->burette.max_dose_ml = 10.0;
  s->burette.ports = 3;
  s->burette.serial_number = "SB-77";
  return *s;
}

/// A burette and a meter reached either natively or through their profiles.
struct ProfileDevicesHost {
  drivers::VirtualClock clock;
  std::unique_ptr<SimulatedBench> bench;
  std::unique_ptr<ProfileSpeakingDevice> burette_dialect, meter_dialect;
  std::unique_ptr<drivers::MemoryTransport> burette_wire, meter_wire;
  std::unique_ptr<drivers::DeviceChannel> burette_link, meter_link;
  std::unique_ptr<drivers::BuretteClient> burette;
  std::unique_ptr<drivers::PotentialSensorClient> meter;

  ProfileDevicesHost(const Scenario& scenario, bool profiles) {
    bench = std::make_unique<SimulatedBench>(scenario, clock);
    if (!profiles) {
      burette_link = std::make_unique<drivers::DeviceLink>(bench->burette_line(), clock, "burette");
      meter_link = std::make_unique<drivers::DeviceLink>(bench->electrode_line(), clock, "meter");
    } else {
      burette_dialect = std::make_unique<ProfileSpeakingDevice>(load("stonebridge_burette.profile"),
                                                                bench->burette());
      meter_dialect = std::make_unique<ProfileSpeakingDevice>(load("lantern_meter.profile"),
                                                              bench->electrode());
      burette_wire = std::make_unique<drivers::MemoryTransport>("burette", *burette_dialect, clock);
      meter_wire = std::make_unique<drivers::MemoryTransport>("meter", *meter_dialect, clock);
      auto b = drivers::ProfileLink::open(*burette_wire, clock, "burette",
                                          load("stonebridge_burette.profile"));
      auto m =
          drivers::ProfileLink::open(*meter_wire, clock, "meter", load("lantern_meter.profile"));
      EXPECT_TRUE(b && m);
      burette_link = std::move(b).value();
      meter_link = std::move(m).value();
    }
    burette = std::make_unique<drivers::BuretteClient>(*burette_link);
    meter = std::make_unique<drivers::PotentialSensorClient>(*meter_link);
  }
  drivers::MemoryTransport& burette_line() {
    return burette_wire ? *burette_wire : bench->burette_line();
  }
};

TEST(StonebridgeOverItsProfile, DosesFillsTurnsTheValveAndStops) {
  ProfileDevicesHost host(stonebridge_scenario(), true);
  std::ostringstream traffic;
  auto log = std::make_shared<drivers::TrafficLog>(traffic);
  drivers::LoggingTransport logged(host.burette_line(), log);
  auto link = drivers::ProfileLink::open(logged, host.clock, "burette",
                                         load("stonebridge_burette.profile"));
  ASSERT_TRUE(link.has_value()) << link.error().message;
  drivers::BuretteClient burette(**link);

  auto info = burette.identify();
  ASSERT_TRUE(info.has_value()) << info.error().message;
  EXPECT_EQ(info->model, "Stonebridge PB-25 piston burette");
  EXPECT_EQ(info->serial_number, "SB-77");
  EXPECT_DOUBLE_EQ(info->cylinder_ml, 25.0);
  EXPECT_DOUBLE_EQ(info->resolution_ml(), 0.0005);
  EXPECT_EQ(info->ports, 3);
  EXPECT_TRUE(info->supports("valve"));
  ASSERT_TRUE(burette.arm_host_silence_stop().has_value());
  ASSERT_TRUE(burette.select_port(2).has_value());
  auto dosed = burette.dose(0.5, 10.0);
  ASSERT_TRUE(dosed.has_value()) << dosed.error().message;
  EXPECT_NEAR(dosed->delivered_ml, 0.5, 1e-9);
  EXPECT_NEAR(dosed->cylinder_content_ml, 24.5, 1e-9);
  EXPECT_EQ(dosed->port, 2);
  EXPECT_EQ(dosed->last_stop, "completed");
  EXPECT_NEAR(host.bench->burette().true_delivered_ml(), 0.5, 1e-9);
  ASSERT_TRUE(burette.fill(40.0).has_value());
  ASSERT_TRUE(burette.start_dose(5.0, 30.0).has_value());
  host.clock.sleep_for(std::chrono::seconds(2));
  auto stopped = burette.stop();
  ASSERT_TRUE(stopped.has_value()) << stopped.error().message;
  EXPECT_EQ(stopped->state, drivers::BuretteState::idle);
  EXPECT_NEAR(stopped->delivered_ml, 0.5 + 1.0, 1e-9);  // 2 s at 30 mL/min
  EXPECT_EQ(stopped->last_stop, "host");
  ASSERT_TRUE(burette.reset_counter().has_value());

  // The instrument's own bytes went over the line.
  const std::string t = traffic.str();
  for (const char* bytes : {"> WHO\\r", "< STONEBRIDGE PB-25 SN SB-77\\r\\n", "> WD 3000\\r",
                            "> PORT 2\\r", "> DV 1000 R 1000 T 8000\\r", "< ACK\\r\\n",
                            "> FL R 4000\\r", "> HALT\\r", "> ST\\r", "> ZERO\\r"}) {
    EXPECT_NE(t.find(bytes), std::string::npos) << bytes << " not in\n" << t;
  }
}

/// The error of one step against a native and a profile host, to compare.
using Step = std::function<std::optional<Error>(ProfileDevicesHost&)>;

template <typename R>
std::optional<Error> error_of(const Result<R>& r) {
  if (r)
    return std::nullopt;
  return r.error();
}

void expect_same_errors(const Scenario& scenario, const Step& step, ErrorKind kind,
                        const std::string& says) {
  for (bool profiles : {false, true}) {
    SCOPED_TRACE(profiles ? "over the profile" : "native");
    ProfileDevicesHost host(scenario, profiles);
    auto e = step(host);
    ASSERT_TRUE(e.has_value());
    EXPECT_EQ(e->kind, kind) << e->describe();
    EXPECT_NE(e->message.find(says), std::string::npos) << e->message;
  }
}

TEST(OverAProfile, TheSameErrorsAsNative) {
  const Scenario s = stonebridge_scenario();
  // Refusals by the device: reasons mapped back to veq's words.
  expect_same_errors(
      s, [](ProfileDevicesHost& h) { return error_of(h.burette->start_dose(12.0, 10.0)); },
      ErrorKind::device_refused, "over_limit");
  expect_same_errors(
      s,
      [](ProfileDevicesHost& h) {
        (void)h.burette->start_dose(1.0, 10.0);
        return error_of(h.burette->start_dose(1.0, 10.0));
      },
      ErrorKind::device_refused, "busy");
  // Faults on the line.
  for (auto [fault, kind, says] :
       {std::tuple{FaultKind::silence, ErrorKind::timeout, "sent nothing within"},
        std::tuple{FaultKind::garbage, ErrorKind::garbled, "burette on memory:burette"},
        std::tuple{FaultKind::partial_line, ErrorKind::timeout, "unfinished line"}}) {
    expect_same_errors(
        s,
        [fault = fault](ProfileDevicesHost& h) {
          h.bench->burette().set_fault({fault, 0.0});
          return error_of(h.burette->status());
        },
        kind, says);
    expect_same_errors(
        s,
        [fault = fault](ProfileDevicesHost& h) {
          h.bench->electrode().set_fault({fault, 0.0});
          return error_of(h.meter->read());
        },
        kind, fault == FaultKind::garbage ? "meter on memory:" : says);
  }
  expect_same_errors(
      s,
      [](ProfileDevicesHost& h) {
        h.burette_line().close();
        return error_of(h.burette->status());
      },
      ErrorKind::disconnected, "closed");
  // A motor fault in the status: the same device fault, and dosing halted.
  Scenario stall = s;
  stall.burette.motor_fault = {MotorFaultKind::stalled, 1.0};
  expect_same_errors(
      stall,
      [](ProfileDevicesHost& h) {
        auto r = error_of(h.burette->dose(1.0, 10.0));
        EXPECT_TRUE(h.burette->halted());
        return r;
      },
      ErrorKind::device_fault, "fault 'stalled'");
  // An operation the instrument does not have.
  Scenario no_valve = s;
  no_valve.burette.ports = 0;
  ProfileDevicesHost native(no_valve, false);
  auto refused = native.burette->select_port(1);
  ASSERT_FALSE(refused.has_value());
  EXPECT_EQ(refused.error().kind, ErrorKind::device_refused);
  EXPECT_NE(refused.error().message.find("unknown_command"), std::string::npos);
}

TEST(OverAProfile, AnUnmappedOperationIsRefusedLikeAnUnknownCommand) {
  ProfileDevicesHost host(stonebridge_scenario(), true);
  drivers::protocol::Message m;
  m.word = "calibrate";
  auto r = host.burette_link->call(m);
  ASSERT_FALSE(r.has_value());
  EXPECT_EQ(r.error().kind, ErrorKind::device_refused);
  EXPECT_NE(r.error().message.find("unknown_command"), std::string::npos);
}

TEST(LanternOverItsProfile, EchoedCommandsPolledAndStreamedReadings) {
  Scenario s = stonebridge_scenario();
  s.electrode.noise_mv = 0.0;
  ProfileDevicesHost host(s, true);
  auto info = host.meter->identify();
  ASSERT_TRUE(info.has_value()) << info.error().message;
  EXPECT_EQ(info->model, "Lantern LM-2 millivolt meter");
  EXPECT_EQ(info->electrode, "calcium ion-selective, virtual");
  EXPECT_EQ(info->serial_number, "virtual-meter-1");
  EXPECT_TRUE(info->supports("stream"));
  const double truth = host.bench->electrode().equilibrium_potential_mv(0.0);
  auto r = host.meter->read();
  ASSERT_TRUE(r.has_value()) << r.error().message;
  EXPECT_NEAR(r->potential_mv, truth, 0.05);  // the meter shows tenths of a mV
  EXPECT_DOUBLE_EQ(r->temperature_c, 25.0);
  ASSERT_TRUE(host.meter->start_streaming(100ms).has_value());
  const auto t0 = host.clock.now();
  for (int i = 1; i <= 5; ++i) {
    auto streamed = host.meter->next_streamed(1000ms);
    ASSERT_TRUE(streamed.has_value()) << streamed.error().message;
    EXPECT_NEAR(streamed->potential_mv, truth, 0.05);
    EXPECT_EQ(host.clock.now() - t0, std::chrono::milliseconds(100 * i));
  }
  ASSERT_TRUE(host.meter->stop_streaming().has_value());
  EXPECT_TRUE(host.meter_dialect->problems().empty());
}

TEST(OverProfiles, AStepwiseTitrationFindsTheEquivalencePoint) {
  // 0.5 mL steps to 15 mL with both instruments on their profiles; the
  // steepest step of the curve brackets the true equivalence volume of
  // 10.000 mL (0.02000 mol/L x 25.0 mL / 0.0500 mol/L, demo_calcium.json).
  Scenario s = stonebridge_scenario();
  s.electrode.response_time_s = 0.0;
  ProfileDevicesHost host(s, true);
  ASSERT_TRUE(host.burette->identify().has_value());
  ASSERT_TRUE(host.burette->arm_host_silence_stop().has_value());
  std::vector<double> volume{0.0}, potential{host.meter->read()->potential_mv};
  for (int step = 1; step <= 30; ++step) {
    auto dosed = host.burette->dose(0.5, 10.0);
    ASSERT_TRUE(dosed.has_value()) << dosed.error().message;
    auto r = host.meter->read();
    ASSERT_TRUE(r.has_value()) << r.error().message;
    volume.push_back(dosed->delivered_ml);
    potential.push_back(r->potential_mv);
  }
  std::size_t steepest = 1;
  for (std::size_t i = 1; i < volume.size(); ++i) {
    if (std::fabs(potential[i] - potential[i - 1]) >
        std::fabs(potential[steepest] - potential[steepest - 1]))
      steepest = i;
  }
  EXPECT_LE(volume[steepest - 1], 10.0);
  EXPECT_GE(volume[steepest], 10.0);
  EXPECT_TRUE(host.burette_dialect->problems().empty());
  EXPECT_TRUE(host.meter_dialect->problems().empty());
}

}  // namespace
}  // namespace veq::simulator
