// A virtual instrument that speaks a device profile's dialect instead of
// veq's native protocol: it reads each command line with the profile, lets a
// native virtual device answer, and writes the answer back in the profile's
// words and units. The simulator plays the invented instruments of
// drivers/profiles/ this way, so that clients are tested over a profile
// byte for byte, with the same line faults as native devices.
#pragma once

#include <string>

#include "drivers/profile.hpp"
#include "simulator/virtual_device.hpp"

namespace veq::simulator {

class ProfileSpeakingDevice final : public drivers::ByteDevice {
 public:
  /// `device` answers the requests; it must outlive this object. Its line
  /// fault (set_fault) applies to what this object sends.
  ProfileSpeakingDevice(drivers::profile::Profile profile, VirtualDevice& device);

  std::string receive(std::string_view bytes) override;
  std::optional<drivers::Duration> next_unsolicited_at() const override;
  std::string unsolicited() override;

  /// Command lines it could not read or answer, for tests ("line: reason").
  const std::vector<std::string>& problems() const { return problems_; }

 private:
  std::string answer(const std::string& line);

  drivers::profile::Profile profile_;
  VirtualDevice& device_;
  std::string pending_;
  std::vector<std::string> problems_;
};

}  // namespace veq::simulator
