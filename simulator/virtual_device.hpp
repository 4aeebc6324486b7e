// Common part of every virtual instrument: line assembly, request parsing,
// replies in veq's native protocol, streamed readings, and switchable faults
// on the line.
#pragma once

#include <deque>
#include <functional>
#include <mutex>
#include <optional>
#include <random>
#include <string>
#include <vector>

#include "drivers/clock.hpp"
#include "drivers/memory_transport.hpp"
#include "drivers/native_protocol.hpp"
#include "simulator/scenario.hpp"

namespace veq::simulator {

/// Default host-silence stop of a veq instrument before the host sets its
/// own (docs/protocol.md), in seconds.
inline constexpr double kDefaultHostSilenceS = 10.0;

class VirtualDevice : public drivers::ByteDevice {
 public:
  VirtualDevice(drivers::Clock& clock, std::uint64_t seed);

  /// Takes host bytes; answers every complete line inside the call.
  std::string receive(std::string_view bytes) override;
  /// When the next streamed reading falls due (if the host asked for them).
  std::optional<drivers::Duration> next_unsolicited_at() const override;
  /// The streamed reading due now, encoded (with the line fault applied).
  std::string unsolicited() override;

  /// Answers one parsed request as the device would, sequence included.
  /// For front ends that speak another dialect (simulator/profile_device.hpp).
  drivers::protocol::Message respond(const drivers::protocol::Message& request);
  /// The streamed reading due at the clock's present time, if any (word
  /// "reading"), moving the next one an interval on. Readings that fell due
  /// while nobody asked are not sent: one reading, the latest, stands for them.
  std::optional<drivers::protocol::Message> take_streamed();
  /// Bytes on their way to the host, after the line fault (if one is on).
  std::string through_line(std::string bytes);

  /// Replaces every fault by this one, from a moment of device time (or
  /// switches all off with FaultKind::none). Callable at run time.
  void set_fault(FaultPlan plan);
  /// Adds a fault beside those already planned (a dead electrode on a slow line).
  void add_fault(FaultPlan plan);
  /// Switches every fault off now.
  void clear_faults() { set_fault(FaultPlan{}); }
  /// The planned faults.
  const std::vector<FaultPlan>& faults() const { return faults_; }
  /// The active fault of a kind at the clock's present time, if any.
  const FaultPlan* active_fault(FaultKind kind) const;
  /// What a disconnect fault does: pulls the device's cable (the bench
  /// closes its line). Without it, a disconnected device just falls silent.
  void on_disconnect(std::function<void()> pull) { pull_cable_ = std::move(pull); }
  /// True when a disconnect fault is active now; pulls the cable (again at
  /// every request while the fault lasts). Front ends call it before
  /// handing a request on.
  bool cable_pulled();
  /// Messages held back by a slow_replies fault that are due now, in order.
  std::string release_delayed();
  /// Devices of one bench share their vessel's state: they answer one request
  /// at a time under this lock when hosts on several threads talk to them.
  void share_lock(std::mutex* bench_lock) { bench_lock_ = bench_lock; }
  /// Called under the bench's lock before each request is handled and each
  /// streamed reading is taken: the bench brings its vessel up to date
  /// (a sample changer's head that has come down meanwhile).
  void before_each(std::function<void()> hook) { before_each_ = std::move(hook); }

 protected:
  /// Answers one parsed request. Called with the clock at the request's time.
  virtual drivers::protocol::Message handle(const drivers::protocol::Message& request) = 0;
  /// A streamed reading's fields (word "reading"); devices that stream
  /// override it. Called when one falls due.
  virtual drivers::protocol::Message reading() { return {}; }

  /// Applies the sensor faults to a reading in place: dead freezes it at its
  /// value when the fault began, spikes add +-size now and then
  /// (default_spike when the plan gives no size). Returns false when the
  /// reading is out of the meter's range (the caller refuses it).
  bool sensor_faults(double& value, double default_spike);

  /// Starts streaming a reading every interval (0 stops), from now.
  void stream_every(drivers::Duration interval);
  bool streaming() const { return stream_interval_ > drivers::Duration::zero(); }

  drivers::Clock& clock_;
  std::mt19937_64 random_;

 private:
  std::string answer(std::string_view line);
  std::unique_lock<std::mutex> lock_bench();

  std::string pending_;
  std::vector<FaultPlan> faults_;
  std::function<void()> pull_cable_;
  std::optional<double> dead_value_;
  /// Messages delayed by slow_replies: when each is due and its bytes.
  std::deque<std::pair<drivers::Duration, std::string>> delayed_;
  std::mutex* bench_lock_ = nullptr;
  std::function<void()> before_each_;
  drivers::Duration stream_interval_{0};
  drivers::Duration next_stream_{0};
};

}  // namespace veq::simulator
