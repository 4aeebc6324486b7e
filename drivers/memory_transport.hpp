// An in-memory transport: bytes written go straight to a device object in the
// same process, which answers inside the call. No threads, no timers: a run in
// virtual time is deterministic.
#pragma once

#include <string>

#include "drivers/clock.hpp"
#include "drivers/transport.hpp"

namespace veq::drivers {

/// A device that receives bytes and returns at once the bytes it sends back
/// (possibly none, a partial line or garbage when a fault is switched on).
class ByteDevice {
 public:
  virtual ~ByteDevice() = default;
  /// Takes bytes from the host; returns the bytes the device sends in reply.
  virtual std::string receive(std::string_view bytes) = 0;
};

/// Connects a host to a ByteDevice in memory. A read that finds no complete
/// line advances the clock by the whole timeout (the host waited in vain) and
/// returns a timeout error naming what, if anything, had arrived.
class MemoryTransport final : public Transport {
 public:
  MemoryTransport(std::string name, ByteDevice& device, Clock& clock);

  std::string describe() const override { return "memory:" + name_; }
  Result<void> write_all(std::string_view bytes, std::chrono::milliseconds timeout) override;
  Result<std::string> read_line(std::chrono::milliseconds timeout) override;
  void discard_input() override { inbox_.clear(); }

  /// Simulates a pulled cable: every later call fails as disconnected.
  void close() { closed_ = true; }

 private:
  std::string name_;
  ByteDevice& device_;
  Clock& clock_;
  std::string inbox_;
  bool closed_ = false;
};

}  // namespace veq::drivers
