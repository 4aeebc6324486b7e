// Host side of a potentiometric sensor (metal-ion or pH electrode with a
// meter), polled or streaming readings at its own rate.
#pragma once

#include <chrono>
#include <optional>
#include <string>
#include <vector>

#include "common/result.hpp"
#include "drivers/device_channel.hpp"
// Kept for the callers that build a DeviceLink from this header alone.
#include "drivers/device_link.hpp"
#include "drivers/features.hpp"
#include "drivers/native_protocol.hpp"

namespace veq::drivers {

/// What a potentiometric sensor says about itself: its capabilities.
struct SensorInfo {
  std::string model;
  std::string electrode;              ///< electrode identity, e.g. "calcium ion-selective #A12"
  std::string serial_number;          ///< of the meter; empty if it does not say
  std::vector<std::string> features;  ///< optional operations offered ("stream", "ping")
  bool supports(std::string_view operation) const { return has_feature(features, operation); }
};

/// One reading of a potentiometric sensor.
struct PotentialReading {
  double potential_mv = 0.0;   ///< cell potential, mV
  double temperature_c = 0.0;  ///< sample temperature, °C
  /// pH from the meter's own calibration, if it reports one (a pH electrode).
  std::optional<double> ph;
};

namespace sensor_messages {
protocol::Message identify();
protocol::Message read();
/// Streamed readings every interval_ms; 0 stops them.
protocol::Message stream(int interval_ms);
Result<SensorInfo> parse_identity(const protocol::Message& reply, const std::string& device);
/// A read reply or a streamed "reading".
Result<PotentialReading> parse_reading(const protocol::Message& reply, const std::string& device);
}  // namespace sensor_messages

class PotentialSensorClient {
 public:
  explicit PotentialSensorClient(DeviceChannel& link);

  Result<SensorInfo> identify();
  /// Asks for one reading now.
  Result<PotentialReading> read();
  /// Asks the meter to send a reading on its own every interval (ms, 50 to
  /// 60000); take them with next_streamed().
  Result<void> start_streaming(std::chrono::milliseconds interval);
  /// Stops streamed readings (readings already on their way are still kept).
  Result<void> stop_streaming();
  /// The next streamed reading, waiting up to `timeout`. Silence is
  /// ErrorKind::timeout; an unreadable line is ErrorKind::garbled.
  Result<PotentialReading> next_streamed(std::chrono::milliseconds timeout);

  std::string describe() const { return link_.describe(); }

 private:
  DeviceChannel& link_;
};

}  // namespace veq::drivers
