#include "drivers/memory_transport.hpp"

#include <utility>

namespace veq::drivers {

MemoryTransport::MemoryTransport(std::string name, ByteDevice& device, Clock& clock)
    : name_(std::move(name)), device_(device), clock_(clock) {}

Result<void> MemoryTransport::write_all(std::string_view bytes, std::chrono::milliseconds) {
  if (closed_) {
    return make_error(ErrorKind::disconnected, describe() + " is closed");
  }
  inbox_ += device_.receive(bytes);
  return {};
}

Result<std::string> MemoryTransport::read_line(std::chrono::milliseconds timeout) {
  const Duration deadline = clock_.now() + timeout;
  while (true) {
    if (closed_) {
      return make_error(ErrorKind::disconnected, describe() + " is closed");
    }
    if (auto line = take_line(inbox_, line_end_)) {
      if (line->size() > kMaxLineBytes) {
        return make_error(ErrorKind::garbled, describe() + " sent a line of " +
                                                  std::to_string(line->size()) + " bytes");
      }
      return std::move(*line);
    }
    if (inbox_.size() > kMaxLineBytes) {
      inbox_.clear();
      return make_error(ErrorKind::garbled, describe() + " sent more than " +
                                                std::to_string(kMaxLineBytes) +
                                                " bytes without a line end");
    }
    // A device streaming readings sends them on its own: wait until the next
    // one is due, if it comes before the deadline.
    if (const auto due = device_.next_unsolicited_at(); due && *due <= deadline) {
      if (*due > clock_.now())
        clock_.sleep_for(*due - clock_.now());
      std::string bytes = device_.unsolicited();
      if (!bytes.empty()) {
        inbox_ += bytes;
        continue;
      }
    }
    // Nothing more will come inside this call: the host waits out its deadline.
    if (deadline > clock_.now())
      clock_.sleep_for(deadline - clock_.now());
    std::string what = inbox_.empty()
                           ? "nothing"
                           : "an unfinished line of " + std::to_string(inbox_.size()) + " bytes";
    return make_error(ErrorKind::timeout, describe() + " sent " + what + " within " +
                                              std::to_string(timeout.count()) + " ms");
  }
}

Result<void> MemoryTransport::set_line_end(std::string_view terminator) {
  if (terminator.empty() || terminator.size() > kMaxTerminatorBytes) {
    return make_error(ErrorKind::invalid_input, describe() + ": a line end must have 1 to " +
                                                    std::to_string(kMaxTerminatorBytes) + " bytes");
  }
  line_end_ = std::string(terminator);
  return {};
}

Result<void> MemoryTransport::reopen() {
  if (reopen_refusals_ != 0) {
    if (reopen_refusals_ > 0)
      --reopen_refusals_;
    return make_error(
        ErrorKind::disconnected,
        describe() + " cannot be reopened; check the cable and that the device is on");
  }
  closed_ = false;
  inbox_.clear();
  ++reopen_count_;
  return {};
}

}  // namespace veq::drivers
