// Line framing and deadlines over any Boost.Asio byte stream (a serial port,
// a TCP socket). Internal to drivers/: included only by the .cpp files that
// open a concrete stream, so that Asio's heavy headers stay out of the rest.
#pragma once

#include <fcntl.h>
#include <unistd.h>

#include <array>
#include <cerrno>
#include <chrono>
#include <cstddef>
#include <functional>
#include <memory>
#include <optional>
#include <string>
#include <string_view>
#include <utility>

#include <boost/asio/io_context.hpp>
#include <boost/asio/steady_timer.hpp>
#include <boost/asio/write.hpp>
#include <boost/system/error_code.hpp>

#include "common/result.hpp"
#include "drivers/line_framing.hpp"
#include "drivers/transport.hpp"

namespace veq::drivers::detail {

/// True for the errors that mean the other end is gone (a pulled USB adapter,
/// a closed pseudo-terminal master, a reset TCP connection), as opposed to a
/// local failure.
inline bool is_disconnection(const boost::system::error_code& ec) {
  namespace errc = boost::system::errc;
  return ec == boost::asio::error::eof || ec == boost::asio::error::connection_reset ||
         ec == boost::asio::error::broken_pipe || ec == boost::asio::error::bad_descriptor ||
         ec == boost::asio::error::not_connected || ec == errc::io_error ||
         ec == errc::no_such_device_or_address || ec == errc::no_such_device;
}

/// A Transport over a Boost.Asio stream that it owns together with its own
/// io_context, run on the caller's thread inside each call: no background
/// thread, so a call returns only when its bytes moved or its deadline passed.
/// One caller at a time (a run's worker thread); not safe for concurrent calls.
///
/// Deadlines are real (steady-clock) time even when the run's clock is scaled,
/// because the line and the device's answer take real time.
template <typename Stream>
class AsioStreamTransport final : public Transport {
 public:
  /// Drops bytes the operating system holds for the stream but nobody read yet.
  using InputDropper = std::function<void(Stream&)>;

  /// `io` must be the context `stream` was built on; both move in here.
  AsioStreamTransport(std::unique_ptr<boost::asio::io_context> io, Stream stream,
                      std::string description, InputDropper drop_pending_input)
      : io_(std::move(io)),
        stream_(std::move(stream)),
        timer_(*io_),
        description_(std::move(description)),
        drop_pending_input_(std::move(drop_pending_input)) {
    // The fast path in write_all() must never block: it moves bytes at once
    // or says "would block", and the timed asynchronous path takes over.
    if constexpr (kHasNonBlockingMode) {
      boost::system::error_code ignored;
      stream_.non_blocking(true, ignored);
    } else {
      const int fd = stream_.native_handle();
      ::fcntl(fd, F_SETFL, ::fcntl(fd, F_GETFL) | O_NONBLOCK);
    }
  }

  std::string describe() const override { return description_; }
  std::chrono::nanoseconds deadline_now() const override { return real_time_now(); }

  Result<void> write_all(std::string_view bytes, std::chrono::milliseconds timeout) override {
    // A request line fits the kernel's buffer, so it normally goes out in one
    // system call, without arming a timer or running the io_context.
    while (!bytes.empty()) {
      boost::system::error_code ec;
      const std::size_t n = try_write(bytes, ec);
      if (ec == boost::asio::error::would_block || ec == boost::asio::error::try_again)
        break;
      if (ec)
        return failure("send", ec);
      bytes.remove_prefix(n);
    }
    if (bytes.empty())
      return {};
    bool timed_out = false;
    boost::system::error_code write_ec;
    timer_.expires_after(timeout);
    timer_.async_wait([&](const boost::system::error_code& ec) {
      if (!ec) {
        timed_out = true;
        boost::system::error_code ignored;
        stream_.cancel(ignored);
      }
    });
    boost::asio::async_write(stream_, boost::asio::buffer(bytes.data(), bytes.size()),
                             [&](const boost::system::error_code& ec, std::size_t) {
                               write_ec = ec;
                               timer_.cancel();
                             });
    io_->restart();
    io_->run();
    if (!write_ec)
      return {};
    if (timed_out) {
      // Only flow control (or a full buffer nobody drains) holds a write back.
      return make_error(ErrorKind::timeout, description_ + ": could not send " +
                                                std::to_string(bytes.size()) + " bytes within " +
                                                std::to_string(timeout.count()) +
                                                " ms; is flow control holding the line?");
    }
    return failure("send", write_ec);
  }

  Result<std::string> read_line(std::chrono::milliseconds timeout) override {
    if (auto line = take_line())
      return std::move(*line);
    const auto deadline = std::chrono::steady_clock::now() + timeout;
    while (true) {
      bool timed_out = false;
      boost::system::error_code read_ec;
      std::size_t received = 0;
      timer_.expires_at(deadline);
      timer_.async_wait([&](const boost::system::error_code& ec) {
        if (!ec) {
          // Cancelling the read is what makes the timeout clean: the read
          // ends with operation_aborted and the port stays open for the next
          // exchange.
          timed_out = true;
          boost::system::error_code ignored;
          stream_.cancel(ignored);
        }
      });
      stream_.async_read_some(boost::asio::buffer(chunk_),
                              [&](const boost::system::error_code& ec, std::size_t n) {
                                read_ec = ec;
                                received = n;
                                timer_.cancel();
                              });
      io_->restart();
      io_->run();
      // Bytes that arrived just as the deadline passed still count.
      input_.append(chunk_.data(), received);
      if (received > 0) {
        if (auto line = take_line())
          return std::move(*line);
      }
      if (read_ec && read_ec != boost::asio::error::operation_aborted)
        return failure("receive", read_ec);
      if (timed_out) {
        // What had arrived stays buffered: a slow device may still finish the
        // line. DeviceLink discards it when it gives up on the exchange.
        const std::string what =
            input_.empty() ? "nothing"
                           : "an unfinished line of " + std::to_string(input_.size()) + " bytes";
        return make_error(ErrorKind::timeout, description_ + " sent " + what + " within " +
                                                  std::to_string(timeout.count()) + " ms");
      }
    }
  }

  void discard_input() override {
    input_.clear();
    if (drop_pending_input_)
      drop_pending_input_(stream_);
  }

  Result<void> set_line_end(std::string_view terminator) override {
    if (terminator.empty() || terminator.size() > kMaxTerminatorBytes) {
      return make_error(ErrorKind::invalid_input, description_ + ": a line end must have 1 to " +
                                                      std::to_string(kMaxTerminatorBytes) +
                                                      " bytes");
    }
    line_end_ = std::string(terminator);
    return {};
  }
  std::string line_end() const override { return line_end_; }

 private:
  /// The next complete line in the input, or an error if the input cannot be
  /// a line, or nothing if more bytes are needed.
  std::optional<Result<std::string>> take_line() {
    auto line = drivers::take_line(input_, line_end_);
    if (!line) {
      if (input_.size() > kMaxLineBytes) {
        const auto size = input_.size();
        input_.clear();
        return Result<std::string>(
            make_error(ErrorKind::garbled, description_ + " sent " + std::to_string(size) +
                                               " bytes without a line end (at most " +
                                               std::to_string(kMaxLineBytes) + " are allowed)"));
      }
      return std::nullopt;
    }
    if (line->size() > kMaxLineBytes) {
      return Result<std::string>(
          make_error(ErrorKind::garbled, description_ + " sent a line of " +
                                             std::to_string(line->size()) + " bytes (at most " +
                                             std::to_string(kMaxLineBytes) + " are allowed)"));
    }
    return Result<std::string>(std::move(*line));
  }

  /// Sockets have a non-blocking mode and send without SIGPIPE; a serial
  /// port has neither, and a plain write() on its non-blocking descriptor
  /// does the same job (a terminal raises no SIGPIPE).
  static constexpr bool kHasNonBlockingMode = requires(Stream & s, boost::system::error_code& e) {
    s.non_blocking(true, e);
  };

  /// One non-blocking write; would_block when the kernel's buffer is full.
  std::size_t try_write(std::string_view bytes, boost::system::error_code& ec) {
    if constexpr (kHasNonBlockingMode) {
      return stream_.write_some(boost::asio::buffer(bytes.data(), bytes.size()), ec);
    } else {
      const ssize_t n = ::write(stream_.native_handle(), bytes.data(), bytes.size());
      if (n < 0) {
        ec = boost::system::error_code(errno, boost::system::system_category());
        return 0;
      }
      ec.clear();
      return static_cast<std::size_t>(n);
    }
  }

  Error failure(const char* action, const boost::system::error_code& ec) const {
    if (is_disconnection(ec)) {
      return make_error(ErrorKind::disconnected,
                        description_ + ": the line is closed (" + ec.message() +
                            " while trying to " + action +
                            "); check the cable and that the device is on");
    }
    return make_error(ErrorKind::io,
                      description_ + ": could not " + action + " (" + ec.message() + ")");
  }

  std::unique_ptr<boost::asio::io_context> io_;
  Stream stream_;
  boost::asio::steady_timer timer_;
  std::string description_;
  InputDropper drop_pending_input_;
  std::array<char, 512> chunk_{};
  std::string input_;
  std::string line_end_{kNativeLineEnd};
};

}  // namespace veq::drivers::detail
