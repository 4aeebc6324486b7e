// A virtual motor burette: cylinder, step resolution, dosing time, systematic
// and random delivery errors (hidden truths), and the device-side safeguards
// of veq's protocol (dose volume and time limits, host-silence stop).
#pragma once

#include "simulator/virtual_device.hpp"

namespace veq::simulator {

class VirtualBurette final : public VirtualDevice {
 public:
  VirtualBurette(const BuretteSpec& spec, drivers::Clock& clock, std::uint64_t seed);

  /// Titrant truly delivered into the vessel up to now, with the burette's
  /// hidden errors (mL). Computed from the clock; changes no state.
  double true_delivered_ml() const;
  /// Volume the burette's own counter shows (steps times step volume, mL).
  double counter_ml() const;
  /// True while the motor moves (dose or fill) at the clock's present time.
  bool moving() const;
  /// True while the motor refills the cylinder at the clock's present time
  /// (moving() and not dosing).
  bool filling() const;
  /// Switches a motor fault on (from after_s of device time; the present
  /// time for at once) or off (kind none) at run time. A motion under way
  /// stops when the fault begins.
  void set_motor_fault(MotorFault fault);
  const MotorFault& motor_fault() const { return spec_.motor_fault; }
  /// How the last motion ended: "completed", "host", "time_limit",
  /// "host_silence", "fault" (a motor fault from the scenario).
  const std::string& last_stop() const { return last_stop_; }
  /// Valve port in use (1..ports; 1 if the valve has no choice).
  int port() const { return port_; }

 protected:
  drivers::protocol::Message handle(const drivers::protocol::Message& request) override;

 private:
  enum class MotionKind { none, dose, fill };
  struct Motion {
    MotionKind kind = MotionKind::none;
    drivers::Duration start{0};
    double volume_ml = 0.0;
    double rate_ml_per_min = 0.0;
    drivers::Duration time_limit{0};
    double dose_error_ml = 0.0;  ///< this dose's random error, spread over its motion
  };

  /// Ends the motion if it is over at the present time.
  void update();
  /// Books a motion that ended having moved moved_ml, and why it ended.
  void finish_motion(double moved_ml, const std::string& why);
  /// When the current motion stops, and why.
  drivers::Duration motion_end(std::string* why) const;
  /// Volume moved by the current motion at time t (mL, quantised to steps).
  double moved_at(drivers::Duration t) const;
  drivers::protocol::Message status_reply(std::uint32_t sequence) const;
  double fill_rate_limit() const;

  BuretteSpec spec_;
  double step_ml_;
  double cylinder_content_ml_;
  double counter_ml_ = 0.0;
  double true_total_ml_ = 0.0;
  Motion motion_;
  std::string last_stop_ = "completed";
  drivers::Duration last_contact_{0};
  drivers::Duration host_silence_limit_;
  int port_ = 1;
  /// A motor fault stopped the last motion; cleared by "stop".
  bool faulted_ = false;
};

}  // namespace veq::simulator
