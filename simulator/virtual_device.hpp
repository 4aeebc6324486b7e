// Common part of every virtual instrument: line assembly, request parsing,
// replies in veq's native protocol, and switchable faults on the line.
#pragma once

#include <mutex>
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

  /// Switches a fault on from a moment of device time (or off with FaultKind::none).
  void set_fault(FaultPlan plan) { fault_ = plan; }
  /// Devices of one bench share their vessel's state: they answer one request
  /// at a time under this lock when hosts on several threads talk to them.
  void share_lock(std::mutex* bench_lock) { bench_lock_ = bench_lock; }

 protected:
  /// Answers one parsed request. Called with the clock at the request's time.
  virtual drivers::protocol::Message handle(const drivers::protocol::Message& request) = 0;

  drivers::Clock& clock_;
  std::mt19937_64 random_;

 private:
  std::string answer(std::string_view line);
  bool fault_active() const;

  std::string pending_;
  FaultPlan fault_;
  std::mutex* bench_lock_ = nullptr;
};

}  // namespace veq::simulator
