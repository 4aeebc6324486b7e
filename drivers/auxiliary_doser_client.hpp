// Host side of an auxiliary doser: pumps that add the reagents a titration
// needs besides the titrant (buffer, masking agent, indicator, water, acid
// and base to adjust the pH), each
// from its own bottle. A dosing device: every request is bounded in volume
// and time, and a failed exchange stops it and halts further doses.
#pragma once

#include <optional>
#include <string>
#include <vector>

#include "common/result.hpp"
#include "drivers/device_channel.hpp"
#include "drivers/dosing_guard.hpp"
#include "drivers/features.hpp"
#include "drivers/native_protocol.hpp"

namespace veq::drivers {

/// A reagent an auxiliary doser adds. Stored with runs: append-only values.
/// acid and base adjust the vessel's pH (an adjust-pH step).
enum class Reagent : int {
  buffer = 1,
  masking_agent = 2,
  indicator = 3,
  water = 4,
  acid = 5,
  base = 6
};

/// "buffer", "masking_agent", "indicator", "water", "acid", "base"
const char* reagent_name(Reagent reagent);
std::optional<Reagent> reagent_from_name(std::string_view name);

/// What an auxiliary doser says about itself: its capabilities.
struct DoserInfo {
  std::string model;
  std::string serial_number;
  std::vector<Reagent> reagents;     ///< the reagents it has a pump and bottle for
  double max_dose_ml = 0.0;          ///< largest volume one dose request may ask for, mL
  double max_rate_ml_per_min = 0.0;  ///< fastest pumping rate, mL/min
  std::vector<std::string> features;
  bool has(Reagent r) const;
  bool supports(std::string_view operation) const { return has_feature(features, operation); }
};

/// Pump state (append-only values).
enum class DoserState : int { idle = 1, dosing = 2, fault = 3 };

struct DoserStatus {
  DoserState state = DoserState::idle;
  std::optional<Reagent> reagent;  ///< the reagent of the current or last dose
  double dosed_ml = 0.0;           ///< volume of the current or last dose so far, mL
  double reservoir_ml = -1.0;      ///< left in that reagent's bottle, mL; negative if unknown
  std::string fault;               ///< "none", "empty", "stalled", "host_silent"...
  std::string last_stop;           ///< "completed", "host", "time_limit", "host_silence"
};

struct DoserClientOptions {
  /// How often status is polled while a pump runs (s); as for the burette.
  double poll_interval_s = 0.2;
  /// Extra time beyond volume / rate before a dose counts as stuck (s); also
  /// the margin of each request's device-side time limit.
  double motion_margin_s = 5.0;
  /// Device-side stop after this much host silence (ms); as for the burette.
  int host_silence_limit_ms = 3000;
};

namespace doser_messages {
protocol::Message identify();
protocol::Message dose(Reagent reagent, double volume_ml, double rate_ml_per_min, long limit_ms);
protocol::Message status();
protocol::Message stop();
protocol::Message host_silence_limit(int ms);
Result<DoserInfo> parse_identity(const protocol::Message& reply, const std::string& device);
Result<DoserStatus> parse_status(const protocol::Message& reply, const std::string& device);
}  // namespace doser_messages

class AuxiliaryDoserClient {
 public:
  AuxiliaryDoserClient(DeviceChannel& link, DoserClientOptions options = {});

  Result<DoserInfo> identify();
  /// Sets the device-side host-silence stop (docs/protocol.md).
  Result<void> arm_host_silence_stop();
  /// Starts one dose; returns at once. Bounded: at most the device's largest
  /// dose (refused above it once identify() has read it), with a device-side
  /// time limit of the planned time plus the margin.
  Result<void> start_dose(Reagent reagent, double volume_ml, double rate_ml_per_min);
  Result<DoserStatus> status();
  /// Stops the pump at once. Always sent, halted or not.
  Result<DoserStatus> stop();
  /// Polls until the pump is idle; a fault or an overlong dose halts dosing.
  Result<DoserStatus> wait_until_idle(double expected_s);
  /// start_dose() then wait_until_idle().
  Result<DoserStatus> dose(Reagent reagent, double volume_ml, double rate_ml_per_min);
  /// Adds any volume as a series of bounded doses, each at most the device's
  /// largest dose and each finished before the next is asked for. Returns the
  /// volume the device reports as dosed in total (mL).
  Result<double> add(Reagent reagent, double volume_ml, double rate_ml_per_min);

  bool halted() const { return guard_.halted(); }
  void resume_dosing() { guard_.clear(); }
  const DoserInfo& info() const { return info_; }
  std::string describe() const { return link_.describe(); }

 private:
  DeviceChannel& link_;
  DoserClientOptions options_;
  DoserInfo info_;
  bool identified_ = false;
  DosingGuard guard_;
};

}  // namespace veq::drivers
