// Every role's client against its virtual device speaking veq's native
// protocol, in virtual time through the in-memory transport: the burette's
// valve and motor faults, the auxiliary doser, streamed potentials, the
// photometer against the Beer-Lambert law, the balance checking a burette,
// the stirrer and the sample changer; then a silent device, a garbled reply
// and a pulled line in each role, each ending with a reason.
#include <gtest/gtest.h>

#include <cmath>
#include <functional>
#include <memory>

#include "chemistry/one_to_one.hpp"
#include "drivers/auxiliary_doser_client.hpp"
#include "drivers/balance_client.hpp"
#include "drivers/burette_client.hpp"
#include "drivers/photometer_client.hpp"
#include "drivers/sample_changer_client.hpp"
#include "drivers/sensor_client.hpp"
#include "drivers/stirrer_client.hpp"
#include "simulator/bench.hpp"
#include "simulator/builtin_scenarios.hpp"

namespace veq::simulator {
namespace {

using namespace std::chrono_literals;
using drivers::Reagent;

Scenario demo_scenario() {
  auto s = parse_scenario(builtin_scenario("demo_calcium"), "demo");
  EXPECT_TRUE(s.has_value());
  return *s;
}

/// A bench and a client for every role, each on its own in-memory line.
struct Roles : ::testing::Test {
  drivers::VirtualClock clock;
  Scenario scenario = demo_scenario();
  std::unique_ptr<SimulatedBench> bench;
  std::vector<std::unique_ptr<drivers::DeviceLink>> links;
  std::unique_ptr<drivers::BuretteClient> burette;
  std::unique_ptr<drivers::PotentialSensorClient> sensor;
  std::unique_ptr<drivers::AuxiliaryDoserClient> doser;
  std::unique_ptr<drivers::PhotometerClient> photometer;
  std::unique_ptr<drivers::BalanceClient> balance;
  std::unique_ptr<drivers::StirrerClient> stirrer;
  std::unique_ptr<drivers::SampleChangerClient> changer;

  drivers::DeviceLink& link(drivers::Transport& line, const char* name) {
    links.push_back(std::make_unique<drivers::DeviceLink>(line, clock, name));
    return *links.back();
  }

  void start() {
    bench = std::make_unique<SimulatedBench>(scenario, clock);
    burette = std::make_unique<drivers::BuretteClient>(link(bench->burette_line(), "burette"));
    sensor = std::make_unique<drivers::PotentialSensorClient>(
        link(bench->electrode_line(), "electrode"));
    doser = std::make_unique<drivers::AuxiliaryDoserClient>(
        link(bench->auxiliary_doser_line(), "doser"));
    photometer =
        std::make_unique<drivers::PhotometerClient>(link(bench->photometer_line(), "photometer"));
    balance = std::make_unique<drivers::BalanceClient>(link(bench->balance_line(), "balance"));
    stirrer = std::make_unique<drivers::StirrerClient>(link(bench->stirrer_line(), "stirrer"));
    changer = std::make_unique<drivers::SampleChangerClient>(
        link(bench->sample_changer_line(), "changer"));
  }
};

// ---- burette: valve, limits, faults ----

TEST_F(Roles, BuretteValvePortsAndLimitsBeforeSending) {
  scenario.burette.ports = 3;
  scenario.burette.max_fill_rate_ml_per_min = 60.0;
  start();
  auto info = burette->identify();
  ASSERT_TRUE(info.has_value()) << info.error().message;
  EXPECT_EQ(info->ports, 3);
  EXPECT_TRUE(info->supports("valve"));
  EXPECT_DOUBLE_EQ(info->max_fill_rate_ml_per_min, 60.0);
  ASSERT_TRUE(burette->select_port(2).has_value());
  auto s = burette->status();
  ASSERT_TRUE(s.has_value());
  EXPECT_EQ(s->port, 2);
  EXPECT_EQ(bench->burette().port(), 2);
  EXPECT_EQ(burette->select_port(4).error().kind, ErrorKind::invalid_input);
  // The valve does not turn while the piston moves.
  ASSERT_TRUE(burette->start_dose(1.0, 10.0).has_value());
  auto busy = burette->select_port(1);
  ASSERT_FALSE(busy.has_value());
  EXPECT_EQ(busy.error().kind, ErrorKind::device_refused);
  EXPECT_NE(busy.error().message.find("busy"), std::string::npos);
  ASSERT_TRUE(burette->stop().has_value());
  // Limits the burette stated are kept before anything is sent.
  EXPECT_EQ(burette->start_dose(6.0, 10.0).error().kind, ErrorKind::invalid_input);
  EXPECT_EQ(burette->start_dose(1.0, 41.0).error().kind, ErrorKind::invalid_input);
  EXPECT_EQ(burette->start_fill(61.0).error().kind, ErrorKind::invalid_input);
  EXPECT_FALSE(burette->halted());
}

TEST_F(Roles, BuretteMotorFaultsAreDeviceFaultsByName) {
  for (auto kind : {MotorFaultKind::stalled, MotorFaultKind::overload, MotorFaultKind::empty}) {
    links.clear();
    scenario.burette.motor_fault = {kind, clock.now_s() + 2.0};
    start();
    auto dosed = burette->dose(1.0, 10.0);  // 6 s planned; the fault strikes at 2 s
    ASSERT_FALSE(dosed.has_value());
    EXPECT_EQ(dosed.error().kind, ErrorKind::device_fault);
    EXPECT_NE(dosed.error().message.find(std::string("fault '") + motor_fault_kind_name(kind)),
              std::string::npos)
        << dosed.error().message;
    EXPECT_NE(dosed.error().message.find("stop sent and confirmed"), std::string::npos);
    // 2 s at 10 mL/min: 0.333 mL, then nothing more.
    EXPECT_NEAR(bench->burette().counter_ml(), 2.0 * 10.0 / 60.0, 0.001);
    EXPECT_TRUE(burette->halted());
    EXPECT_FALSE(burette->start_dose(0.1, 10.0).has_value());
    clock.sleep_for(std::chrono::seconds(30));
    EXPECT_FALSE(bench->burette().moving());
  }
}

// ---- potentiometric sensor: streaming ----

TEST_F(Roles, SensorStreamsAtItsOwnRate) {
  scenario.electrode.noise_mv = 0.0;
  start();
  auto info = sensor->identify();
  ASSERT_TRUE(info.has_value());
  EXPECT_TRUE(info->supports("stream"));
  ASSERT_TRUE(sensor->start_streaming(100ms).has_value());
  const auto t0 = clock.now();
  for (int i = 1; i <= 10; ++i) {
    auto r = sensor->next_streamed(1000ms);
    ASSERT_TRUE(r.has_value()) << r.error().message;
    EXPECT_EQ(clock.now() - t0, std::chrono::milliseconds(100 * i));
    EXPECT_NEAR(r->potential_mv, bench->electrode().equilibrium_potential_mv(0.0), 1e-3);
  }
  // A poll between streamed readings still gets its own reply.
  ASSERT_TRUE(sensor->read().has_value());
  ASSERT_TRUE(sensor->stop_streaming().has_value());
  auto none = sensor->next_streamed(500ms);
  ASSERT_FALSE(none.has_value());
  EXPECT_EQ(none.error().kind, ErrorKind::timeout);
  EXPECT_EQ(sensor->start_streaming(10ms).error().kind, ErrorKind::invalid_input);
}

// ---- auxiliary doser ----

TEST_F(Roles, DoserAddsReagentsInBoundedDoses) {
  start();
  auto info = doser->identify();
  ASSERT_TRUE(info.has_value()) << info.error().message;
  EXPECT_TRUE(info->has(Reagent::buffer));
  EXPECT_FALSE(info->has(Reagent::masking_agent));
  ASSERT_TRUE(doser->arm_host_silence_stop().has_value());
  const auto before = clock.now();
  auto s = doser->dose(Reagent::buffer, 2.0, 10.0);
  ASSERT_TRUE(s.has_value()) << s.error().message;
  EXPECT_NEAR(s->dosed_ml, 2.0, 1e-9);
  EXPECT_EQ(s->reagent, Reagent::buffer);
  EXPECT_NEAR(s->reservoir_ml, 498.0, 1e-6);
  EXPECT_NEAR(drivers::to_seconds(clock.now() - before), 12.0, 0.21);
  // 12 mL of water with a 5 mL largest dose: three doses of 4 mL.
  auto added = doser->add(Reagent::water, 12.0, 20.0);
  ASSERT_TRUE(added.has_value()) << added.error().message;
  EXPECT_NEAR(*added, 12.0, 1e-9);
  EXPECT_NEAR(bench->auxiliary_doser().true_added_ml(Reagent::water), 12.0, 1e-9);
  EXPECT_NEAR(bench->auxiliary_doser().true_added_ml(), 14.0, 1e-9);
  EXPECT_EQ(doser->start_dose(Reagent::water, 6.0, 10.0).error().kind, ErrorKind::invalid_input);
  EXPECT_EQ(doser->start_dose(Reagent::masking_agent, 1.0, 10.0).error().kind,
            ErrorKind::invalid_input);
}

TEST_F(Roles, DoserRefusesWhatItCannotDoEvenUnasked) {
  start();  // no identify: the device's own limits refuse
  auto big = doser->start_dose(Reagent::buffer, 6.0, 10.0);
  ASSERT_FALSE(big.has_value());
  EXPECT_EQ(big.error().kind, ErrorKind::device_refused);
  EXPECT_NE(big.error().message.find("over_limit"), std::string::npos);
  auto none = doser->start_dose(Reagent::masking_agent, 1.0, 10.0);
  ASSERT_FALSE(none.has_value());
  EXPECT_NE(none.error().message.find("bad_field"), std::string::npos);
  EXPECT_FALSE(doser->halted());  // refusals move nothing
}

TEST_F(Roles, DoserStopsByItselfWhenTheHostFallsSilent) {
  start();
  ASSERT_TRUE(doser->arm_host_silence_stop().has_value());                   // 3000 ms
  ASSERT_TRUE(doser->start_dose(Reagent::indicator, 5.0, 1.0).has_value());  // 300 s planned
  clock.sleep_for(std::chrono::seconds(60));
  EXPECT_FALSE(bench->auxiliary_doser().moving());
  EXPECT_NEAR(bench->auxiliary_doser().true_added_ml(Reagent::indicator), 0.05, 1e-6);
  auto s = doser->status();
  ASSERT_TRUE(s.has_value());
  EXPECT_EQ(s->fault, "host_silent");
  EXPECT_EQ(s->last_stop, "host_silence");
}

TEST_F(Roles, DoserMotorFaultHaltsDosing) {
  scenario.auxiliary_doser.motor_fault = {MotorFaultKind::empty, 1.0};
  start();
  auto s = doser->dose(Reagent::buffer, 1.0, 10.0);
  ASSERT_FALSE(s.has_value());
  EXPECT_EQ(s.error().kind, ErrorKind::device_fault);
  EXPECT_NE(s.error().message.find("fault 'empty'"), std::string::npos) << s.error().message;
  EXPECT_TRUE(doser->halted());
  EXPECT_FALSE(doser->start_dose(Reagent::buffer, 1.0, 10.0).has_value());
}

TEST_F(Roles, AddedWaterDilutesWhatTheElectrodeSees) {
  scenario.electrode.noise_mv = 0.0;
  scenario.electrode.response_time_s = 0.0;
  start();
  const double e0 = sensor->read()->potential_mv;
  // 25 mL of water into the 25 mL sample halves the free calcium before any
  // titrant: the Nernst equation gives E - E' = (S/2) log10(2), with S the
  // slope at 25 °C times the scenario's 98 %.
  ASSERT_TRUE(doser->add(Reagent::water, 25.0, 20.0).has_value());
  const double e1 = sensor->read()->potential_mv;
  const double slope = nernst_slope_mv(25.0) * 0.98;
  EXPECT_NEAR(e0 - e1, slope / 2.0 * std::log10(2.0), 0.01);
}

// ---- photometric sensor ----

TEST_F(Roles, PhotometerFollowsBeerLambert) {
  scenario.photometer.noise_absorbance = 0.0;
  start();
  auto info = photometer->identify();
  ASSERT_TRUE(info.has_value()) << info.error().message;
  EXPECT_DOUBLE_EQ(info->path_length_cm, 1.0);
  ASSERT_TRUE(photometer->set_wavelength(745.0).has_value());
  ASSERT_TRUE(photometer->zero().has_value());
  auto blank = photometer->read();
  ASSERT_TRUE(blank.has_value());
  EXPECT_NEAR(blank->absorbance, 0.0, 1e-5);
  EXPECT_NEAR(blank->transmittance_percent, 100.0, 1e-3);

  // Before the equivalence point (10 mL) nearly all titrant is bound
  // (K' about 10^10): [MY] = c_T v / (V0 + v). After it, all metal is:
  // [MY] = c_M V0 / (V0 + v). A = epsilon b [MY] (Beer-Lambert law), with
  // the scenario's invented epsilon of 95 L/(mol cm) at the band's peak.
  const double eps = 95.0, b = 1.0, v0 = 25.0, cm = 0.02, ct = 0.05;
  ASSERT_TRUE(burette->dose(5.0, 40.0).has_value());
  auto before = photometer->read();
  ASSERT_TRUE(before.has_value());
  EXPECT_NEAR(before->absorbance, eps * b * ct * 5.0 / (v0 + 5.0), 1e-4);
  EXPECT_NEAR(before->transmittance_percent, 100.0 * std::pow(10.0, -before->absorbance), 1e-3);
  for (int i = 0; i < 2; ++i)
    ASSERT_TRUE(burette->dose(5.0, 40.0).has_value());
  ASSERT_TRUE(burette->fill(40.0).has_value());
  ASSERT_TRUE(burette->dose(5.0, 40.0).has_value());
  auto after = photometer->read();
  ASSERT_TRUE(after.has_value());
  EXPECT_NEAR(after->absorbance, eps * b * cm * v0 / (v0 + 20.0), 1e-4);
  // One band width off the peak the band is down by exp(-1/2).
  ASSERT_TRUE(photometer->set_wavelength(745.0 - 90.0).has_value());
  EXPECT_NEAR(bench->photometer().true_absorbance(655.0) - 0.05,
              (bench->photometer().true_absorbance(745.0) - 0.05) * std::exp(-0.5), 1e-12);
  EXPECT_EQ(photometer->set_wavelength(900.0).error().kind, ErrorKind::invalid_input);
}

// ---- balance ----

TEST_F(Roles, BalanceChecksTheBurette) {
  scenario.balance.receives_burette = true;
  scenario.balance.load_g = 30.0;  // a small beaker under the tip
  scenario.balance.noise_g = 0.0;
  scenario.burette.systematic_error_percent = 0.5;
  start();
  auto info = balance->identify();
  ASSERT_TRUE(info.has_value());
  EXPECT_DOUBLE_EQ(info->readability_g, 0.0001);
  ASSERT_TRUE(balance->read_stable().has_value());
  // A beaker of water put on the pan: while the reading settles, tare is refused.
  bench->balance().place(20.0);
  auto early = balance->tare();
  ASSERT_FALSE(early.has_value());
  EXPECT_EQ(early.error().kind, ErrorKind::device_refused);
  EXPECT_NE(early.error().message.find("unstable"), std::string::npos);
  ASSERT_TRUE(balance->read_stable().has_value());
  ASSERT_TRUE(balance->tare().has_value());
  ASSERT_TRUE(burette->dose(5.0, 20.0).has_value());
  auto mass = balance->read_stable();
  ASSERT_TRUE(mass.has_value()) << mass.error().message;
  EXPECT_TRUE(mass->stable);
  // 5 mL x 1.005 (the hidden +0.5 %) x 0.99820 g/mL = 5.0160 g, to the
  // balance's 0.1 mg and its stable band of 0.3 mg.
  EXPECT_NEAR(mass->mass_g, 5.0 * 1.005 * 0.99820, 0.0004);
  // The check itself: weighed volume against the burette's counter.
  const double weighed_ml = mass->mass_g / 0.99820;
  EXPECT_NEAR((weighed_ml / 5.0 - 1.0) * 100.0, 0.5, 0.01);
}

TEST_F(Roles, BalanceOverloadAndNoStableReading) {
  scenario.balance.load_g = 250.0;  // above the 220 g capacity
  start();
  auto over = balance->read();
  ASSERT_FALSE(over.has_value());
  EXPECT_EQ(over.error().kind, ErrorKind::device_refused);
  EXPECT_NE(over.error().message.find("over_limit"), std::string::npos);

  scenario.balance.load_g = 10.0;
  scenario.balance.noise_g = 0.0;
  scenario.balance.settle_time_s = 100.0;  // a draught that never settles in time
  links.clear();
  start();
  bench->balance().place(5.0);
  drivers::BalanceClientOptions quick;
  quick.stable_timeout_s = 5.0;
  drivers::DeviceLink l(bench->balance_line(), clock, "balance");
  drivers::BalanceClient impatient(l, quick);
  ASSERT_TRUE(impatient.read().has_value());  // first reading: settled at 10 g
  bench->balance().place(5.0);
  auto never = impatient.read_stable();
  ASSERT_FALSE(never.has_value());
  EXPECT_EQ(never.error().kind, ErrorKind::timeout);
  EXPECT_NE(never.error().message.find("no stable reading within 5.0 s"), std::string::npos);
}

// ---- stirrer ----

TEST_F(Roles, StirrerRampsAndReportsADecoupledBar) {
  scenario.stirrer.decouple_above_rpm = 1000.0;
  start();
  auto info = stirrer->identify();
  ASSERT_TRUE(info.has_value());
  ASSERT_TRUE(stirrer->set_speed(600.0).has_value());
  clock.sleep_for(std::chrono::seconds(1));
  EXPECT_NEAR(stirrer->status()->speed_rpm, 400.0, 1e-9);  // 400 rpm/s ramp
  clock.sleep_for(std::chrono::seconds(1));
  EXPECT_NEAR(stirrer->status()->speed_rpm, 600.0, 1e-9);
  EXPECT_EQ(stirrer->set_speed(50.0).error().kind, ErrorKind::invalid_input);  // below 100
  ASSERT_TRUE(stirrer->set_speed(1200.0).has_value());
  clock.sleep_for(std::chrono::seconds(3));
  auto s = stirrer->status();
  ASSERT_TRUE(s.has_value());
  EXPECT_EQ(s->fault, "stalled");
  EXPECT_EQ(s->speed_rpm, 0.0);
  ASSERT_TRUE(stirrer->stop().has_value());
  EXPECT_EQ(stirrer->status()->fault, "none");
}

// ---- sample changer ----

TEST_F(Roles, SampleChangerMovesLowersRinsesAndMeetsABlockedPosition) {
  scenario.sample_changer.blocked_position = 8;
  start();
  auto info = changer->identify();
  ASSERT_TRUE(info.has_value());
  EXPECT_EQ(info->positions, 12);
  EXPECT_TRUE(info->has_rinse);
  const auto t0 = clock.now();
  auto at5 = changer->move_to(5);
  ASSERT_TRUE(at5.has_value()) << at5.error().message;
  EXPECT_EQ(at5->position, 5);
  EXPECT_NEAR(drivers::to_seconds(clock.now() - t0), 4.0, 0.21);  // 4 positions at 1 s
  auto down = changer->lower();
  ASSERT_TRUE(down.has_value());
  EXPECT_EQ(down->head, drivers::HeadPosition::down);
  auto refused = changer->move_to(6);
  ASSERT_FALSE(refused.has_value());
  EXPECT_EQ(refused.error().kind, ErrorKind::device_refused);
  EXPECT_NE(refused.error().message.find("bad_state"), std::string::npos);
  ASSERT_TRUE(changer->rinse(10.0).has_value());
  EXPECT_NEAR(bench->sample_changer().rinsed_s(), 10.0, 1e-9);
  ASSERT_TRUE(changer->raise().has_value());
  auto blocked = changer->move_to(10);
  ASSERT_FALSE(blocked.has_value());
  EXPECT_EQ(blocked.error().kind, ErrorKind::device_fault);
  EXPECT_NE(blocked.error().message.find("blocked"), std::string::npos);
  EXPECT_EQ(bench->sample_changer().position(), 7);
  EXPECT_EQ(changer->move_to(13).error().kind, ErrorKind::invalid_input);
}

// ---- a silent device, a garbled reply, a pulled line: every role ----

struct RoleCase {
  const char* name;
  std::function<drivers::MemoryTransport&(SimulatedBench&)> line;
  std::function<void(VirtualDevice&, FaultPlan)> fault;
  /// One exchange of the role's client; returns its error (or nothing).
  std::function<std::optional<Error>(Roles&)> call;
};

template <typename R>
std::optional<Error> role_error_of(const Result<R>& r) {
  if (r)
    return std::nullopt;
  return r.error();
}

std::vector<RoleCase> every_role() {
  auto set = [](VirtualDevice& d, FaultPlan p) { d.set_fault(p); };
  return {
      {"burette", [](SimulatedBench& b) -> drivers::MemoryTransport& { return b.burette_line(); },
       set, [](Roles& r) { return role_error_of(r.burette->status()); }},
      {"electrode",
       [](SimulatedBench& b) -> drivers::MemoryTransport& { return b.electrode_line(); }, set,
       [](Roles& r) { return role_error_of(r.sensor->read()); }},
      {"doser",
       [](SimulatedBench& b) -> drivers::MemoryTransport& { return b.auxiliary_doser_line(); }, set,
       [](Roles& r) { return role_error_of(r.doser->status()); }},
      {"photometer",
       [](SimulatedBench& b) -> drivers::MemoryTransport& { return b.photometer_line(); }, set,
       [](Roles& r) { return role_error_of(r.photometer->read()); }},
      {"balance", [](SimulatedBench& b) -> drivers::MemoryTransport& { return b.balance_line(); },
       set, [](Roles& r) { return role_error_of(r.balance->read()); }},
      {"stirrer", [](SimulatedBench& b) -> drivers::MemoryTransport& { return b.stirrer_line(); },
       set, [](Roles& r) { return role_error_of(r.stirrer->status()); }},
      {"changer",
       [](SimulatedBench& b) -> drivers::MemoryTransport& { return b.sample_changer_line(); }, set,
       [](Roles& r) { return role_error_of(r.changer->status()); }},
  };
}

VirtualDevice& device_of(SimulatedBench& b, const std::string& name) {
  if (name == "burette")
    return b.burette();
  if (name == "electrode")
    return b.electrode();
  if (name == "doser")
    return b.auxiliary_doser();
  if (name == "photometer")
    return b.photometer();
  if (name == "balance")
    return b.balance();
  if (name == "stirrer")
    return b.stirrer();
  return b.sample_changer();
}

TEST_F(Roles, EveryRoleEndsSafelyWithAReason) {
  start();
  for (const auto& c : every_role()) {
    SCOPED_TRACE(c.name);
    VirtualDevice& device = device_of(*bench, c.name);
    ASSERT_FALSE(c.call(*this).has_value()) << "healthy " << c.name << " failed";

    device.set_fault({FaultKind::silence, 0.0});
    auto silent = c.call(*this);
    ASSERT_TRUE(silent.has_value());
    EXPECT_EQ(silent->kind, ErrorKind::timeout);
    EXPECT_NE(silent->message.find(std::string(c.name) + " on memory:"), std::string::npos)
        << silent->message;

    device.set_fault({FaultKind::garbage, 0.0});
    auto garbled = c.call(*this);
    ASSERT_TRUE(garbled.has_value());
    EXPECT_EQ(garbled->kind, ErrorKind::garbled) << garbled->describe();

    device.set_fault({FaultKind::partial_line, 0.0});
    auto partial = c.call(*this);
    ASSERT_TRUE(partial.has_value());
    EXPECT_EQ(partial->kind, ErrorKind::timeout);
    EXPECT_NE(partial->message.find("unfinished line"), std::string::npos);

    device.set_fault({FaultKind::none, 0.0});
    ASSERT_FALSE(c.call(*this).has_value()) << c.name << " did not recover";

    c.line(*bench).close();
    auto pulled = c.call(*this);
    ASSERT_TRUE(pulled.has_value());
    EXPECT_EQ(pulled->kind, ErrorKind::disconnected);
  }
}

TEST_F(Roles, ADosingDeviceGoingSilentMidDoseStopsByItself) {
  // The host cannot tell a silent device to stop: the device's own
  // host-silence stop and the dose's time limit must end the motion.
  start();
  ASSERT_TRUE(burette->arm_host_silence_stop().has_value());
  ASSERT_TRUE(doser->arm_host_silence_stop().has_value());
  ASSERT_TRUE(burette->start_dose(5.0, 1.0).has_value());
  ASSERT_TRUE(doser->start_dose(Reagent::buffer, 5.0, 1.0).has_value());
  bench->burette().set_fault({FaultKind::silence, 0.0});
  bench->auxiliary_doser().set_fault({FaultKind::silence, 0.0});
  auto b = burette->wait_until_idle(300.0);
  auto d = doser->wait_until_idle(300.0);
  ASSERT_FALSE(b.has_value());
  ASSERT_FALSE(d.has_value());
  EXPECT_EQ(b.error().kind, ErrorKind::timeout);
  EXPECT_NE(b.error().message.find("stop not confirmed"), std::string::npos) << b.error().message;
  EXPECT_TRUE(burette->halted());
  EXPECT_TRUE(doser->halted());
  // The device still hears the host (only its answers are lost), so the
  // client's stop got through; had it not, the host-silence stop would have
  // ended the dose 3 s later (DoserStopsByItselfWhenTheHostFallsSilent).
  EXPECT_FALSE(bench->burette().moving());
  EXPECT_FALSE(bench->auxiliary_doser().moving());
  const double burette_ml = bench->burette().counter_ml();
  const double doser_ml = bench->auxiliary_doser().true_added_ml();
  clock.sleep_for(std::chrono::seconds(60));
  EXPECT_DOUBLE_EQ(bench->burette().counter_ml(), burette_ml);
  EXPECT_DOUBLE_EQ(bench->auxiliary_doser().true_added_ml(), doser_ml);
}

}  // namespace
}  // namespace veq::simulator
