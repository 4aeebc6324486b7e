// Host side of a stirrer: set a speed, read back the speed it reached.
#pragma once

#include <string>
#include <vector>

#include "common/result.hpp"
#include "drivers/device_channel.hpp"
#include "drivers/features.hpp"
#include "drivers/native_protocol.hpp"

namespace veq::drivers {

/// What a stirrer says about itself: its capabilities.
struct StirrerInfo {
  std::string model;
  std::string serial_number;
  double max_speed_rpm = 0.0;         ///< fastest speed, revolutions per minute
  double min_speed_rpm = 0.0;         ///< slowest speed other than stopped, rpm; 0 if any
  std::vector<std::string> features;  ///< "status", "ping"
  bool supports(std::string_view operation) const { return has_feature(features, operation); }
};

struct StirrerStatus {
  double speed_rpm = 0.0;    ///< speed now, rpm (ramps towards the target)
  double target_rpm = -1.0;  ///< speed asked for, rpm; negative if the device does not say
  std::string fault;         ///< "none", "stalled" (the stir bar decoupled)...
};

namespace stirrer_messages {
protocol::Message identify();
protocol::Message speed(double rpm);
protocol::Message status();
Result<StirrerInfo> parse_identity(const protocol::Message& reply, const std::string& device);
Result<StirrerStatus> parse_status(const protocol::Message& reply, const std::string& device);
}  // namespace stirrer_messages

class StirrerClient {
 public:
  explicit StirrerClient(DeviceChannel& link);

  Result<StirrerInfo> identify();
  /// Sets the speed (rpm); 0 stops. Refused outside the device's range once
  /// identify() has read it.
  Result<void> set_speed(double rpm);
  Result<StirrerStatus> status();
  /// set_speed(0).
  Result<void> stop() { return set_speed(0.0); }
  std::string describe() const { return link_.describe(); }

 private:
  DeviceChannel& link_;
  StirrerInfo info_;
  bool identified_ = false;
};

}  // namespace veq::drivers
