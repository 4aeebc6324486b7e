// Host side of a photometric sensor: absorbance (or transmittance) of the
// vessel's solution at a chosen wavelength, relative to a zero reference.
#pragma once

#include <string>
#include <vector>

#include "common/result.hpp"
#include "drivers/device_channel.hpp"
#include "drivers/features.hpp"
#include "drivers/native_protocol.hpp"

namespace veq::drivers {

/// What a photometer says about itself: its capabilities.
struct PhotometerInfo {
  std::string model;
  std::string serial_number;
  double min_wavelength_nm = 0.0;     ///< shortest wavelength it can measure at, nm
  double max_wavelength_nm = 0.0;     ///< longest, nm (equal to the shortest for a fixed filter)
  double path_length_cm = 0.0;        ///< optical path through the sample, cm; 0 if unknown
  std::vector<std::string> features;  ///< "wavelength", "zero", "ping"
  bool supports(std::string_view operation) const { return has_feature(features, operation); }
};

/// One photometric reading. Absorbance A = log10(I0 / I) against the last
/// zero reference; transmittance T = 100 % * I / I0 = 100 % * 10^-A.
struct PhotometricReading {
  double absorbance = 0.0;
  double transmittance_percent = 100.0;  ///< from the device, or from A if it gives none
  double wavelength_nm = 0.0;            ///< from the device, or 0 if it does not say
};

namespace photometer_messages {
protocol::Message identify();
protocol::Message read();
protocol::Message wavelength(double nm);
protocol::Message zero();
Result<PhotometerInfo> parse_identity(const protocol::Message& reply, const std::string& device);
Result<PhotometricReading> parse_reading(const protocol::Message& reply, const std::string& device);
}  // namespace photometer_messages

class PhotometerClient {
 public:
  explicit PhotometerClient(DeviceChannel& link);

  Result<PhotometerInfo> identify();
  /// Chooses the measuring wavelength (nm); refused outside the device's
  /// range once identify() has read it.
  Result<void> set_wavelength(double nm);
  /// Takes the solution now in the light path as the reference: A = 0,
  /// T = 100 % from here on (a blank, or the sample before titrant).
  Result<void> zero();
  Result<PhotometricReading> read();
  std::string describe() const { return link_.describe(); }

 private:
  DeviceChannel& link_;
  PhotometerInfo info_;
  bool identified_ = false;
};

}  // namespace veq::drivers
