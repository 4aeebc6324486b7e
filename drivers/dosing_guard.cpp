#include "drivers/dosing_guard.hpp"

namespace veq::drivers {

Result<void> DosingGuard::check() const {
  std::lock_guard lock(mutex_);
  if (!halted_)
    return {};
  return make_error(cause_.kind,
                    link_.describe() + ": dosing is halted after an earlier failure (" +
                        cause_.message + "); check the device, then allow dosing again");
}

Error DosingGuard::halt(const Error& cause) {
  {
    std::lock_guard lock(mutex_);
    if (!halted_) {
      halted_ = true;
      cause_ = cause;
    }
  }
  protocol::Message stop;
  stop.word = "stop";
  auto stopped = link_.call(stop);
  return make_error(cause.kind,
                    cause.message + (stopped ? "; stop sent and confirmed"
                                             : "; stop not confirmed: " + stopped.error().message));
}

bool DosingGuard::halted() const {
  std::lock_guard lock(mutex_);
  return halted_;
}

void DosingGuard::clear() {
  std::lock_guard lock(mutex_);
  halted_ = false;
  cause_ = Error{};
}

}  // namespace veq::drivers
