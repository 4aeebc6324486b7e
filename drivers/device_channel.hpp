// What every device client talks through: requests and replies in the shape
// of veq's native protocol (a word and named fields), whatever the instrument
// speaks on its line. DeviceLink speaks the native protocol itself; a
// ProfileLink (drivers/profile_link.hpp) translates to an instrument's own
// commands through a device profile. Both share what this base class does:
// one exchange at a time, streamed readings kept for whoever asks, and the
// reconnect policy that never lets a dose run on unnoticed after a lost line.
#pragma once

#include <chrono>
#include <cstddef>
#include <deque>
#include <mutex>
#include <optional>
#include <string>

#include "common/result.hpp"
#include "drivers/clock.hpp"
#include "drivers/native_protocol.hpp"
#include "drivers/transport.hpp"

namespace veq::drivers {

/// What a link does when it finds its line closed (a pulled cable, a
/// serial-to-network converter that dropped the connection).
struct ReconnectPolicy {
  /// Attempts to reopen the line before the exchange fails as disconnected.
  /// 0 (the default) never reopens: a closed line ends the exchange at once,
  /// which is what a titration that must stop on a pulled cable wants. Set it
  /// (3 is plenty) for converters that drop idle connections.
  int max_attempts = 0;
  /// Wait before the first attempt (ms): a converter needs a moment to accept
  /// again, and a cable being plugged back in needs longer.
  std::chrono::milliseconds first_delay{250};
  /// Each further wait is this many times the one before (back-off), so that
  /// a device that is really gone is not hammered.
  double backoff_factor = 2.0;
  /// No wait is longer than this (ms); with the defaults three attempts span
  /// 0.25 + 0.5 + 1 s, far inside a dosing device's 3 s host-silence stop.
  std::chrono::milliseconds max_delay{2000};
};

/// Tuning of a request/reply exchange.
struct LinkOptions {
  /// Deadline for a reply (ms), on the transport's time base
  /// (Transport::deadline_now()): real time on a serial or TCP line even when
  /// the run's clock is scaled. 2 s is far above a device's normal answer time
  /// (well under 50 ms on a serial line) yet short enough to stop quickly.
  std::chrono::milliseconds reply_timeout{2000};
  /// Reopening a closed line (off by default).
  ReconnectPolicy reconnect;
  /// Streamed readings kept while nobody takes them; beyond this the oldest
  /// is dropped (and counted). 64 readings is six seconds at 10 per second.
  std::size_t unsolicited_capacity = 64;
};

class DeviceChannel {
 public:
  virtual ~DeviceChannel() = default;
  DeviceChannel(const DeviceChannel&) = delete;
  DeviceChannel& operator=(const DeviceChannel&) = delete;

  /// Sends a request and waits for its reply. A reply that cannot be parsed
  /// is ErrorKind::garbled; a refusal from the device is
  /// ErrorKind::device_refused with the device's reason; no reply in time is
  /// ErrorKind::timeout; a closed line is ErrorKind::disconnected. Every
  /// message names the device and the command.
  ///
  /// A closed line is reopened if the reconnect policy allows. If a dose or
  /// fill may have been in flight (a "dose" or "fill" was sent and no idle
  /// status or stop confirmed its end), the first request on the new line is
  /// "stop", and the call fails as disconnected saying so: the caller's idea
  /// of the motion is no longer true. Otherwise the request is sent once more.
  ///
  /// Safe to call from several threads: exchanges are serialised, so an
  /// operator's stop from another thread goes out right after the exchange in
  /// flight (an exchange lasts milliseconds; at most the reply timeout).
  Result<protocol::Message> call(protocol::Message request);

  /// The next message the device sent on its own (a streamed reading, word
  /// "reading"), waiting up to `timeout` for one. Readings that arrived while
  /// a request waited for its reply are kept and come first, oldest first.
  Result<protocol::Message> next_unsolicited(std::chrono::milliseconds timeout);

  const std::string& device_name() const { return name_; }
  std::string describe() const { return name_ + " on " + transport_.describe(); }
  Clock& clock() { return clock_; }
  const LinkOptions& options() const { return options_; }

  /// True from a "dose" or "fill" request until a stop or an idle status.
  bool dose_may_be_in_flight() const;
  /// How many times the line was reopened.
  int reconnections() const;
  /// Streamed readings dropped because nobody took them in time.
  std::size_t dropped_unsolicited() const;

 protected:
  DeviceChannel(Transport& transport, Clock& clock, std::string device_name, LinkOptions options);

  /// One request and its reply on the line as it is, without reopening it.
  virtual Result<protocol::Message> exchange(protocol::Message request) = 0;
  /// Reads one line within `timeout`: the message if the device sent it on
  /// its own, nothing if it was something else (a stale reply, skipped).
  virtual Result<std::optional<protocol::Message>> read_unsolicited(
      std::chrono::milliseconds timeout) = 0;
  /// Keeps a streamed message that arrived while waiting for a reply.
  void keep_unsolicited(protocol::Message message);

  Transport& transport_;
  Clock& clock_;
  std::string name_;
  LinkOptions options_;

 private:
  /// Reopens the line under the policy; says how it went.
  Result<int> reopen_line();
  void track_motion(const protocol::Message& request, const protocol::Message& reply);

  mutable std::mutex exchange_;
  std::deque<protocol::Message> unsolicited_;
  std::size_t dropped_ = 0;
  bool dose_in_flight_ = false;
  int reconnections_ = 0;
};

}  // namespace veq::drivers
