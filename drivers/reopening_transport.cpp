#include "drivers/reopening_transport.hpp"

#include <utility>

namespace veq::drivers {

ReopeningTransport::ReopeningTransport(std::unique_ptr<Transport> first, Opener opener)
    : inner_(std::move(first)), opener_(std::move(opener)), description_(inner_->describe()) {}

Error ReopeningTransport::closed() const {
  return make_error(ErrorKind::disconnected,
                    description_ +
                        " is closed and could not be reopened; check the cable and "
                        "that the device is on");
}

Result<void> ReopeningTransport::write_all(std::string_view bytes,
                                           std::chrono::milliseconds timeout) {
  if (!inner_)
    return closed();
  return inner_->write_all(bytes, timeout);
}

Result<std::string> ReopeningTransport::read_line(std::chrono::milliseconds timeout) {
  if (!inner_)
    return closed();
  return inner_->read_line(timeout);
}

std::chrono::nanoseconds ReopeningTransport::deadline_now() const {
  if (!inner_)
    return real_time_now();
  return inner_->deadline_now();
}

void ReopeningTransport::discard_input() {
  if (inner_)
    inner_->discard_input();
}

Result<void> ReopeningTransport::set_line_end(std::string_view terminator) {
  if (inner_) {
    if (auto set = inner_->set_line_end(terminator); !set)
      return set;
  }
  line_end_ = std::string(terminator);
  return {};
}

Result<void> ReopeningTransport::reopen() {
  inner_.reset();
  auto opened = opener_();
  if (!opened)
    return opened.error();
  if (auto set = (*opened)->set_line_end(line_end_); !set)
    return set;
  inner_ = std::move(opened).value();
  ++reopen_count_;
  return {};
}

}  // namespace veq::drivers
