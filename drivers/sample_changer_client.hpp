// Host side of a sample changer: a rack of vessels and a head (electrodes,
// stirrer, dosing tips) that is raised, carried to a position and lowered
// into the vessel there; a rinse station washes the head between samples.
#pragma once

#include <string>
#include <vector>

#include "common/result.hpp"
#include "drivers/device_channel.hpp"
#include "drivers/features.hpp"
#include "drivers/native_protocol.hpp"

namespace veq::drivers {

/// What a sample changer says about itself: its capabilities.
struct ChangerInfo {
  std::string model;
  std::string serial_number;
  int positions = 0;                  ///< rack positions 1..positions
  bool has_rinse = false;             ///< a rinse pump for the head
  std::vector<std::string> features;  ///< "rinse", "stop", "ping"
  bool supports(std::string_view operation) const { return has_feature(features, operation); }
};

/// What the changer is doing (append-only values).
enum class ChangerState : int { idle = 1, moving = 2, rinsing = 3, fault = 4 };
/// Where the head is (append-only values).
enum class HeadPosition : int { up = 1, down = 2, between = 3 };

struct ChangerStatus {
  ChangerState state = ChangerState::idle;
  int position = 0;  ///< rack position under the head (0 while between)
  HeadPosition head = HeadPosition::up;
  std::string fault;  ///< "none", "blocked"...
};

struct ChangerClientOptions {
  /// Between status polls while the changer moves (s).
  double poll_interval_s = 0.2;
  /// Longest a move, lift or rinse may take beyond what the changer itself
  /// said it would (s): a rack turns a full circle in well under a minute.
  double motion_timeout_s = 60.0;
};

namespace changer_messages {
protocol::Message identify();
protocol::Message move(int position);
protocol::Message lower();
protocol::Message raise();
protocol::Message rinse(double seconds);
protocol::Message status();
protocol::Message stop();
Result<ChangerInfo> parse_identity(const protocol::Message& reply, const std::string& device);
Result<ChangerStatus> parse_status(const protocol::Message& reply, const std::string& device);
}  // namespace changer_messages

const char* changer_state_name(ChangerState state);
const char* head_position_name(HeadPosition head);

class SampleChangerClient {
 public:
  SampleChangerClient(DeviceChannel& link, ChangerClientOptions options = {});

  Result<ChangerInfo> identify();
  /// Carries the raised head to a position and waits until it is there.
  /// The changer refuses (bad_state) while the head is down.
  Result<ChangerStatus> move_to(int position);
  /// Lowers the head into the vessel and waits.
  Result<ChangerStatus> lower();
  /// Raises the head out of the vessel and waits.
  Result<ChangerStatus> raise();
  /// Rinses the head for `seconds` and waits.
  Result<ChangerStatus> rinse(double seconds);
  Result<ChangerStatus> status();
  /// Stops any motion at once (if the changer can).
  Result<ChangerStatus> stop();
  std::string describe() const { return link_.describe(); }

 private:
  Result<ChangerStatus> wait_until_idle(const std::string& what);

  DeviceChannel& link_;
  ChangerClientOptions options_;
  ChangerInfo info_;
  bool identified_ = false;
};

}  // namespace veq::drivers
