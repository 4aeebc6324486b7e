// An in-memory transport: bytes written go straight to a device object in the
// same process, which answers inside the call. No threads, no timers: a run in
// virtual time is deterministic.
#pragma once

#include <optional>
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

  /// When the device next sends bytes on its own (a streamed reading), on the
  /// clock it was built with; nothing if it only ever answers. Hosts in
  /// virtual time wait until then; servers on real lines arm a timer.
  virtual std::optional<Duration> next_unsolicited_at() const { return std::nullopt; }
  /// The bytes the device sends on its own at the clock's present time (empty
  /// if none are due).
  virtual std::string unsolicited() { return {}; }
};

/// Connects a host to a ByteDevice in memory. A read that finds no complete
/// line advances the clock to the device's next streamed message, if one is
/// due before the deadline, or else by the whole timeout (the host waited in
/// vain) and returns a timeout error naming what, if anything, had arrived.
class MemoryTransport final : public Transport {
 public:
  MemoryTransport(std::string name, ByteDevice& device, Clock& clock);

  std::string describe() const override { return "memory:" + name_; }
  Result<void> write_all(std::string_view bytes, std::chrono::milliseconds timeout) override;
  Result<std::string> read_line(std::chrono::milliseconds timeout) override;
  void discard_input() override { inbox_.clear(); }
  /// The run's clock, which read_line() advances while it waits.
  std::chrono::nanoseconds deadline_now() const override { return clock_.now(); }
  Result<void> set_line_end(std::string_view terminator) override;
  std::string line_end() const override { return line_end_; }
  /// Succeeds unless refuse_reopen() said otherwise; the line starts empty.
  Result<void> reopen() override;

  /// Simulates a pulled cable: every later call fails as disconnected until
  /// reopen().
  void close() { closed_ = true; }
  bool is_closed() const { return closed_; }
  /// The next `times` reopen() calls fail (a cable still out); -1: all of them.
  void refuse_reopen(int times) { reopen_refusals_ = times; }
  /// How many times reopen() succeeded.
  int reopen_count() const { return reopen_count_; }

 private:
  std::string name_;
  ByteDevice& device_;
  Clock& clock_;
  std::string inbox_;
  std::string line_end_{kNativeLineEnd};
  bool closed_ = false;
  int reopen_refusals_ = 0;
  int reopen_count_ = 0;
};

}  // namespace veq::drivers
