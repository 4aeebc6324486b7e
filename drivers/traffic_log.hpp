// A log of the raw traffic on device lines, with timestamps, for diagnosing
// an instrument that misbehaves: every byte the host sends, every line it
// receives, and what went wrong on the line (timeouts, closed lines, reopening).
//
// One entry per line of text:
//   2026-03-04T10:15:30.123456Z +12.345678 burette@serial:/dev/ttyUSB0 > 7 dose volume_ml=0.05000
//   ... *1067\n
// wall-clock time (UTC, microseconds: to match the lab's notes), seconds on
// the steady clock since the log was opened (to measure intervals), the line,
// the direction (">" host to device, "<" device to host, "!" an event), and
// the bytes with control and non-ASCII bytes escaped (\r, \n, \xNN).
#pragma once

#include <chrono>
#include <cstdint>
#include <iosfwd>
#include <memory>
#include <mutex>
#include <string>
#include <string_view>

#include "common/result.hpp"
#include "drivers/transport.hpp"

namespace veq::drivers {

class TrafficLog {
 public:
  enum class Direction : int { sent = 1, received = 2, event = 3 };

  /// Writes to a stream the caller keeps alive for the log's whole life.
  explicit TrafficLog(std::ostream& out);
  ~TrafficLog();
  TrafficLog(const TrafficLog&) = delete;
  TrafficLog& operator=(const TrafficLog&) = delete;

  /// The log appending to a file, shared by every line that names the same
  /// path (one writer, one lock, entries never interleaved within a line).
  /// Errors: ErrorKind::io naming the path.
  static Result<std::shared_ptr<TrafficLog>> open_file(const std::string& path);

  /// Records bytes on a line. Safe from any thread.
  void record(std::string_view line, Direction direction, std::string_view bytes);
  /// Records an event on a line (a timeout, a closed line, a reopening).
  void note(std::string_view line, std::string_view event) {
    record(line, Direction::event, event);
  }
  /// Entries written so far.
  std::uint64_t entries() const;

 private:
  std::unique_ptr<std::ostream> owned_;
  std::ostream* out_;
  std::chrono::steady_clock::time_point start_;
  mutable std::mutex mutex_;
  std::uint64_t entries_ = 0;
};

/// A transport that records everything passing through another one in a
/// TrafficLog and otherwise behaves exactly like it.
class LoggingTransport final : public Transport {
 public:
  /// Logs traffic of `inner`, which it owns.
  LoggingTransport(std::unique_ptr<Transport> inner, std::shared_ptr<TrafficLog> log);
  /// Logs traffic of `inner`, which must outlive this transport.
  LoggingTransport(Transport& inner, std::shared_ptr<TrafficLog> log);

  std::string describe() const override { return inner_->describe(); }
  Result<void> write_all(std::string_view bytes, std::chrono::milliseconds timeout) override;
  Result<std::string> read_line(std::chrono::milliseconds timeout) override;
  void discard_input() override;
  std::chrono::nanoseconds deadline_now() const override { return inner_->deadline_now(); }
  Result<void> set_line_end(std::string_view terminator) override;
  std::string line_end() const override { return inner_->line_end(); }
  Result<void> reopen() override;

 private:
  std::unique_ptr<Transport> owned_;
  Transport* inner_;
  std::shared_ptr<TrafficLog> log_;
};

}  // namespace veq::drivers
