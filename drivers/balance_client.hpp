// Host side of a balance: a stable mass reading, for weighed samples and for
// checking a burette by weighing the water it delivers.
#pragma once

#include <string>
#include <vector>

#include "common/result.hpp"
#include "drivers/device_channel.hpp"
#include "drivers/features.hpp"
#include "drivers/native_protocol.hpp"

namespace veq::drivers {

/// What a balance says about itself: its capabilities.
struct BalanceInfo {
  std::string model;
  std::string serial_number;
  double capacity_g = 0.0;            ///< largest load, g
  double readability_g = 0.0;         ///< smallest step of the display, g
  std::vector<std::string> features;  ///< "tare", "ping"
  bool supports(std::string_view operation) const { return has_feature(features, operation); }
};

struct MassReading {
  double mass_g = 0.0;  ///< net mass on the pan, g
  bool stable = false;  ///< the balance judges the reading settled
};

struct BalanceClientOptions {
  /// Between readings while waiting for a stable one (s): a balance settles
  /// over seconds, and 0.25 s catches the first stable reading promptly.
  double poll_interval_s = 0.25;
  /// Longest wait for a stable reading (s): an analytical balance settles in
  /// a few seconds; 30 s allows for a draught shield being closed (common
  /// practice).
  double stable_timeout_s = 30.0;
};

namespace balance_messages {
protocol::Message identify();
protocol::Message read();
protocol::Message tare();
Result<BalanceInfo> parse_identity(const protocol::Message& reply, const std::string& device);
Result<MassReading> parse_reading(const protocol::Message& reply, const std::string& device);
}  // namespace balance_messages

class BalanceClient {
 public:
  BalanceClient(DeviceChannel& link, BalanceClientOptions options = {});

  Result<BalanceInfo> identify();
  /// The reading now, stable or not.
  Result<MassReading> read();
  /// Polls until the balance reports a stable reading; ErrorKind::timeout if
  /// none comes within the options' limit.
  Result<MassReading> read_stable();
  /// Sets the present load as zero (the device refuses while unstable).
  Result<void> tare();
  std::string describe() const { return link_.describe(); }

 private:
  DeviceChannel& link_;
  BalanceClientOptions options_;
};

}  // namespace veq::drivers
