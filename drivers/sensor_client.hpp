// Host side of a potentiometric sensor (metal-ion or pH electrode with a meter)
// speaking veq's native protocol.
#pragma once

#include <string>

#include "common/result.hpp"
#include "drivers/device_link.hpp"

namespace veq::drivers {

struct SensorInfo {
  std::string model;
  std::string electrode;  ///< electrode identity, e.g. "calcium ion-selective #A12"
};

/// One reading of a potentiometric sensor.
struct PotentialReading {
  double potential_mv = 0.0;   ///< cell potential, mV
  double temperature_c = 0.0;  ///< sample temperature, °C
};

class PotentialSensorClient {
 public:
  explicit PotentialSensorClient(DeviceLink& link);

  Result<SensorInfo> identify();
  Result<PotentialReading> read();
  std::string describe() const { return link_.describe(); }

 private:
  DeviceLink& link_;
};

}  // namespace veq::drivers
