// Host side of a motor burette speaking veq's native protocol.
#pragma once

#include <string>

#include "common/result.hpp"
#include "drivers/device_link.hpp"

namespace veq::drivers {

/// What a burette says about itself.
struct BuretteInfo {
  std::string model;
  double cylinder_ml = 0.0;          ///< cylinder volume, mL
  double steps_per_cylinder = 0.0;   ///< motor steps for one full cylinder
  double max_rate_ml_per_min = 0.0;  ///< fastest dosing or filling rate, mL/min
  double max_dose_ml = 0.0;          ///< largest volume one dose request may ask for, mL
};

/// Motion state reported by the burette (append-only values).
enum class BuretteState : int { idle = 1, dosing = 2, filling = 3, fault = 4 };

struct BuretteStatus {
  BuretteState state = BuretteState::idle;
  double cylinder_content_ml = 0.0;  ///< titrant left in the cylinder, mL
  double delivered_ml = 0.0;         ///< delivered since the last counter reset, mL
  /// Titrant left in the reservoir bottle, mL; negative if the device cannot tell.
  double reservoir_ml = -1.0;
  std::string fault;  ///< "none", "stalled", "empty", "host_silent"...
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

class BuretteClient {
 public:
  BuretteClient(DeviceLink& link, BuretteClientOptions options = {});

  Result<BuretteInfo> identify();
  /// Sets the device-side host-silence stop (see docs/protocol.md).
  Result<void> arm_host_silence_stop();
  /// Starts dosing volume_ml at rate; returns at once. The request carries a
  /// time limit so the device stops by itself if the host vanishes.
  Result<void> start_dose(double volume_ml, double rate_ml_per_min);
  /// Starts refilling the cylinder from the reservoir at rate; returns at once.
  Result<void> start_fill(double rate_ml_per_min);
  Result<BuretteStatus> status();
  /// Stops any motion at once.
  Result<BuretteStatus> stop();
  /// Resets the delivered-volume counter to zero.
  Result<void> reset_counter();
  /// Polls until the motor is idle, sleeping on the link's clock between polls.
  /// A fault state or a motion longer than expected_s + margin is an error.
  Result<BuretteStatus> wait_until_idle(double expected_s);
  /// start_dose() then wait_until_idle().
  Result<BuretteStatus> dose(double volume_ml, double rate_ml_per_min);
  /// start_fill() then wait_until_idle().
  Result<BuretteStatus> fill(double rate_ml_per_min);

  const BuretteInfo& info() const { return info_; }
  std::string describe() const { return link_.describe(); }

 private:
  DeviceLink& link_;
  BuretteClientOptions options_;
  BuretteInfo info_;
};

const char* burette_state_name(BuretteState state);

}  // namespace veq::drivers
