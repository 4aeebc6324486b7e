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
  if (closed_) {
    return make_error(ErrorKind::disconnected, describe() + " is closed");
  }
  const auto end = inbox_.find('\n');
  if (end == std::string::npos) {
    if (inbox_.size() > kMaxLineBytes) {
      inbox_.clear();
      return make_error(ErrorKind::garbled, describe() + " sent more than " +
                                                std::to_string(kMaxLineBytes) +
                                                " bytes without a line end");
    }
    // Nothing more will come inside this call: the host waits out its deadline.
    clock_.sleep_for(timeout);
    std::string what = inbox_.empty()
                           ? "nothing"
                           : "an unfinished line of " + std::to_string(inbox_.size()) + " bytes";
    return make_error(ErrorKind::timeout, describe() + " sent " + what + " within " +
                                              std::to_string(timeout.count()) + " ms");
  }
  std::string line = inbox_.substr(0, end);
  inbox_.erase(0, end + 1);
  if (!line.empty() && line.back() == '\r')
    line.pop_back();
  if (line.size() > kMaxLineBytes) {
    return make_error(ErrorKind::garbled,
                      describe() + " sent a line of " + std::to_string(line.size()) + " bytes");
  }
  return line;
}

}  // namespace veq::drivers
