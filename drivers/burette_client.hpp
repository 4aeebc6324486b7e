// Host side of a motor burette: veq's native protocol through a DeviceLink,
// or an instrument's own commands through a ProfileLink; the client is the
// same either way.
#pragma once

#include <string>
#include <vector>

#include "common/result.hpp"
#include "drivers/device_channel.hpp"
// Kept for the callers that build a DeviceLink from this header alone.
#include "drivers/device_link.hpp"
#include "drivers/dosing_guard.hpp"
#include "drivers/features.hpp"
#include "drivers/native_protocol.hpp"

namespace veq::drivers {

/// What a burette says about itself: its capabilities.
struct BuretteInfo {
  std::string model;
  double cylinder_ml = 0.0;          ///< cylinder volume, mL
  double steps_per_cylinder = 0.0;   ///< motor steps for one full cylinder
  double max_rate_ml_per_min = 0.0;  ///< fastest dosing rate, mL/min
  double max_dose_ml = 0.0;          ///< largest volume one dose request may ask for, mL
  /// Fastest filling rate, mL/min; the dosing maximum if the device gives none.
  double max_fill_rate_ml_per_min = 0.0;
  /// Outlet ports of the valve the host may choose (1..ports); 0: no choice.
  int ports = 0;
  std::string serial_number;          ///< empty if the device does not say
  std::vector<std::string> features;  ///< optional operations offered ("fill", "valve"...)

  /// Volume of one motor step, mL (the finest dose).
  double resolution_ml() const {
    return steps_per_cylinder > 0.0 ? cylinder_ml / steps_per_cylinder : 0.0;
  }
  bool supports(std::string_view operation) const { return has_feature(features, operation); }
};

/// Motion state reported by the burette (append-only values).
enum class BuretteState : int { idle = 1, dosing = 2, filling = 3, fault = 4 };

struct BuretteStatus {
  BuretteState state = BuretteState::idle;
  double cylinder_content_ml = 0.0;  ///< titrant left in the cylinder, mL
  double delivered_ml = 0.0;         ///< delivered since the last counter reset, mL
  /// Titrant left in the reservoir bottle, mL; negative if the device cannot tell.
  double reservoir_ml = -1.0;
  /// "none", or what stopped the motor: "empty" (no titrant to draw),
  /// "stalled" (the piston did not move), "overload" (the drive drew too
  /// much current), "host_silent" (the host-silence stop fired).
  std::string fault;
  /// How the last motion ended: "completed", "host", "time_limit",
  /// "host_silence", "fault"; empty if the device does not say.
  std::string last_stop;
  int port = 0;  ///< valve port in use; 0 if unknown
};

/// Tuning of the host's handling of a burette.
struct BuretteClientOptions {
  /// How often status is polled while the motor moves (s). 0.2 s keeps the
  /// volume known to a few microlitres at 1 mL/min without flooding the line.
  double poll_interval_s = 0.2;
  /// Extra time allowed beyond volume / rate before a motion counts as stuck (s).
  double motion_margin_s = 5.0;
  /// Device-side stop if the host says nothing for this long (ms). Every request
  /// resets it; the host polls far more often than this while dosing.
  int host_silence_limit_ms = 3000;
};

/// The native messages of a burette as pure functions, for the client and
/// the byte fixtures (sequence numbers are the link's business: 0 here).
namespace burette_messages {
protocol::Message identify();
protocol::Message dose(double volume_ml, double rate_ml_per_min, long limit_ms);
protocol::Message fill(double rate_ml_per_min);
protocol::Message status();
protocol::Message stop();
protocol::Message valve(int port);
protocol::Message reset_counter();
protocol::Message host_silence_limit(int ms);
/// An identify reply; ErrorKind::invalid_input if the device is no burette.
Result<BuretteInfo> parse_identity(const protocol::Message& reply, const std::string& device);
/// A status or stop reply.
Result<BuretteStatus> parse_status(const protocol::Message& reply, const std::string& device);
}  // namespace burette_messages

class BuretteClient {
 public:
  BuretteClient(DeviceChannel& link, BuretteClientOptions options = {});

  /// Reads the burette's capabilities. Once they are known, doses and fills
  /// beyond them are refused before anything is sent.
  Result<BuretteInfo> identify();
  /// Sets the device-side host-silence stop (see docs/protocol.md).
  Result<void> arm_host_silence_stop();
  /// Starts dosing volume_ml at rate; returns at once. The request carries a
  /// time limit so the device stops by itself if the host vanishes. Refused
  /// (invalid_input) above the device's largest dose or fastest rate once
  /// identify() has read them, and while dosing is halted (see halted()).
  Result<void> start_dose(double volume_ml, double rate_ml_per_min);
  /// Starts refilling the cylinder from the reservoir at rate; returns at once.
  Result<void> start_fill(double rate_ml_per_min);
  Result<BuretteStatus> status();
  /// Stops any motion at once. Always sent, halted or not.
  Result<BuretteStatus> stop();
  /// Resets the delivered-volume counter to zero.
  Result<void> reset_counter();
  /// Turns the valve to an outlet port (1..ports); refused while moving.
  Result<void> select_port(int port);
  /// Polls until the motor is idle, sleeping on the link's clock between polls.
  /// A fault state or a motion longer than expected_s + margin is an error.
  Result<BuretteStatus> wait_until_idle(double expected_s);
  /// start_dose() then wait_until_idle().
  Result<BuretteStatus> dose(double volume_ml, double rate_ml_per_min);
  /// start_fill() then wait_until_idle().
  Result<BuretteStatus> fill(double rate_ml_per_min);

  /// True once an exchange failed while the motor may have been moving, or
  /// the burette reported a fault: "stop" was sent and further doses and
  /// fills are refused until resume_dosing().
  bool halted() const { return guard_.halted(); }
  /// Allows doses again after a halt (the operator has checked the burette).
  void resume_dosing() { guard_.clear(); }

  const BuretteInfo& info() const { return info_; }
  std::string describe() const { return link_.describe(); }

 private:
  DeviceChannel& link_;
  BuretteClientOptions options_;
  BuretteInfo info_;
  DosingGuard guard_;
};

const char* burette_state_name(BuretteState state);

}  // namespace veq::drivers
