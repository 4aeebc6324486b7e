// The host's half of the watchdog for a dosing device (burette, auxiliary
// doser): once an exchange fails while liquid may be moving, the device is
// told to stop and no further dose or fill is sent until someone who has
// checked the device says so. The device's half (every dose bounded in volume
// and time, the host-silence stop) is in docs/protocol.md.
#pragma once

#include <mutex>
#include <string>

#include "common/result.hpp"
#include "drivers/device_channel.hpp"

namespace veq::drivers {

class DosingGuard {
 public:
  explicit DosingGuard(DeviceChannel& link) : link_(link) {}

  /// Nothing if doses may be sent; else the error that halted dosing.
  Result<void> check() const;
  /// Sends "stop" (best effort: the line may be the thing that failed),
  /// refuses further doses and returns `cause` with what became of the stop
  /// appended. Call it with the error of any exchange made while liquid may
  /// be moving, and with a fault the device reports.
  Error halt(const Error& cause);
  bool halted() const;
  /// Allows doses again (after the operator has checked the device).
  void clear();

 private:
  DeviceChannel& link_;
  mutable std::mutex mutex_;
  bool halted_ = false;
  Error cause_;
};

}  // namespace veq::drivers
