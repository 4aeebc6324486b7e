// A device reached through a device profile (drivers/profile.hpp): the
// clients send native requests and get native replies, and this link turns
// them into the instrument's own commands and back. A client over a
// ProfileLink behaves like one over a DeviceLink: the same Result errors
// (timeout, garbled, device_refused, disconnected), the same reconnect policy.
#pragma once

#include <memory>
#include <string>

#include "common/result.hpp"
#include "drivers/device_channel.hpp"
#include "drivers/profile.hpp"

namespace veq::drivers {

class ProfileLink final : public DeviceChannel {
 public:
  /// Sets the transport's line end to the profile's reply end; fails
  /// (invalid_input) if the transport cannot.
  static Result<std::unique_ptr<ProfileLink>> open(Transport& transport, Clock& clock,
                                                   std::string device_name,
                                                   profile::Profile profile,
                                                   LinkOptions options = {});

  const profile::Profile& profile() const { return profile_; }

 protected:
  /// identify answers with the role and model of the profile, its facts and
  /// `features` (the optional operations it maps), beside whatever the
  /// instrument's own reply gives. An operation the profile does not map is
  /// refused as a native device refuses an unknown command
  /// (device_refused, reason unknown_command).
  Result<protocol::Message> exchange(protocol::Message request) override;
  Result<std::optional<protocol::Message>> read_unsolicited(
      std::chrono::milliseconds timeout) override;

 private:
  ProfileLink(Transport& transport, Clock& clock, std::string device_name, profile::Profile profile,
              LinkOptions options);
  Result<protocol::Message> run(const profile::Operation& op, const protocol::Message& request,
                                const std::string& where);

  profile::Profile profile_;
  std::chrono::milliseconds reply_timeout_;
};

}  // namespace veq::drivers
