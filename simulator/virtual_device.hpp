// Common part of every virtual instrument: line assembly, request parsing,
// replies in veq's native protocol, streamed readings, and switchable faults
// on the line.
#pragma once

#include <mutex>
#include <optional>
#include <random>
#include <string>

#include "drivers/clock.hpp"
#include "drivers/memory_transport.hpp"
#include "drivers/native_protocol.hpp"
#include "simulator/scenario.hpp"

namespace veq::simulator {

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

  /// Switches a fault on from a moment of device time (or off with FaultKind::none).
  void set_fault(FaultPlan plan) { fault_ = plan; }
  /// Devices of one bench share their vessel's state: they answer one request
  /// at a time under this lock when hosts on several threads talk to them.
  void share_lock(std::mutex* bench_lock) { bench_lock_ = bench_lock; }

 protected:
  /// Answers one parsed request. Called with the clock at the request's time.
  virtual drivers::protocol::Message handle(const drivers::protocol::Message& request) = 0;
  /// A streamed reading's fields (word "reading"); devices that stream
  /// override it. Called when one falls due.
  virtual drivers::protocol::Message reading() { return {}; }

  /// Starts streaming a reading every interval (0 stops), from now.
  void stream_every(drivers::Duration interval);
  bool streaming() const { return stream_interval_ > drivers::Duration::zero(); }

  drivers::Clock& clock_;
  std::mt19937_64 random_;

 private:
  std::string answer(std::string_view line);
  bool fault_active() const;
  std::unique_lock<std::mutex> lock_bench();

  std::string pending_;
  FaultPlan fault_;
  std::mutex* bench_lock_ = nullptr;
  drivers::Duration stream_interval_{0};
  drivers::Duration next_stream_{0};
};

}  // namespace veq::simulator
