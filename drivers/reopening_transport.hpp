// A transport that can open its line again: it holds the recipe that opened
// the line (a serial port's settings, a TCP address) and, when asked, closes
// what is left of the old line and opens a new one with the same line end.
// open_transport() hands out transports of this kind. When to reopen, how
// often and what to send first is the link's reconnect policy
// (drivers/device_channel.hpp), not the transport's.
#pragma once

#include <functional>
#include <memory>
#include <string>

#include "common/result.hpp"
#include "drivers/transport.hpp"

namespace veq::drivers {

class ReopeningTransport final : public Transport {
 public:
  /// Opens a line; called again by reopen().
  using Opener = std::function<Result<std::unique_ptr<Transport>>()>;

  /// `first` is the line `opener` opened a moment ago.
  ReopeningTransport(std::unique_ptr<Transport> first, Opener opener);

  std::string describe() const override { return description_; }
  Result<void> write_all(std::string_view bytes, std::chrono::milliseconds timeout) override;
  Result<std::string> read_line(std::chrono::milliseconds timeout) override;
  void discard_input() override;
  /// The open line's; real time while closed (every call fails at once then).
  std::chrono::nanoseconds deadline_now() const override;
  Result<void> set_line_end(std::string_view terminator) override;
  std::string line_end() const override { return line_end_; }
  /// Closes the old line first (a serial port is released before it is
  /// opened again), then opens a new one. On failure the transport stays
  /// closed: every call is ErrorKind::disconnected until a reopen succeeds.
  Result<void> reopen() override;

  /// How many times reopen() succeeded.
  int reopen_count() const { return reopen_count_; }

 private:
  Error closed() const;

  std::unique_ptr<Transport> inner_;
  Opener opener_;
  std::string description_;
  std::string line_end_{kNativeLineEnd};
  int reopen_count_ = 0;
};

}  // namespace veq::drivers
