// Request/reply over a transport in veq's native protocol: sequence numbers,
// deadlines, stale replies, error replies.
#pragma once

#include <chrono>
#include <cstdint>
#include <mutex>
#include <string>

#include "common/result.hpp"
#include "drivers/clock.hpp"
#include "drivers/native_protocol.hpp"
#include "drivers/transport.hpp"

namespace veq::drivers {

/// Tuning of a request/reply exchange.
struct LinkOptions {
  /// Deadline for a reply (ms). 2 s is far above a device's normal answer time
  /// (well under 50 ms on a serial line) yet short enough to stop quickly.
  std::chrono::milliseconds reply_timeout{2000};
};

/// One device at the end of one transport.
class DeviceLink {
 public:
  DeviceLink(Transport& transport, Clock& clock, std::string device_name, LinkOptions options = {});

  /// Sends a request and waits for the reply with the same sequence number.
  /// A reply for an older request (left over after a timeout) is skipped. A
  /// line that cannot be parsed is ErrorKind::garbled; an "error" reply is
  /// ErrorKind::device_refused with the device's reason; no reply in time is
  /// ErrorKind::timeout. Every message names the device and the command.
  /// Safe to call from several threads: exchanges are serialised, so an
  /// operator's stop from another thread goes out right after the exchange in
  /// flight (an exchange lasts milliseconds; at most the reply timeout).
  Result<protocol::Message> call(protocol::Message request);

  const std::string& device_name() const { return name_; }
  std::string describe() const { return name_ + " on " + transport_.describe(); }
  Clock& clock() { return clock_; }

 private:
  Transport& transport_;
  Clock& clock_;
  std::string name_;
  LinkOptions options_;
  std::uint32_t next_sequence_ = 1;
  std::mutex exchange_;
};

}  // namespace veq::drivers
