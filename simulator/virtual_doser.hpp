// A virtual auxiliary doser: one pump and bottle per reagent (buffer, masking
// agent, indicator, water, acid, base), with the safeguards of a dosing device (every
// dose bounded in volume and time, the host-silence stop), a hidden delivery
// error and motor faults from the scenario.
#pragma once

#include <array>

#include "drivers/auxiliary_doser_client.hpp"
#include "simulator/virtual_device.hpp"

namespace veq::simulator {

class VirtualAuxiliaryDoser final : public VirtualDevice {
 public:
  VirtualAuxiliaryDoser(const AuxiliaryDoserSpec& spec, drivers::Clock& clock, std::uint64_t seed);

  /// Liquid of every reagent truly added to the vessel up to now, with the
  /// hidden delivery error (mL).
  double true_added_ml() const;
  /// Of one reagent (mL).
  double true_added_ml(drivers::Reagent reagent) const;
  /// Left in a reagent's bottle (mL).
  double reservoir_ml(drivers::Reagent reagent) const;
  bool moving() const;
  /// Switches a motor fault on (from after_s of device time; the present
  /// time for at once) or off (kind none) at run time. A motion under way
  /// stops when the fault begins.
  void set_motor_fault(MotorFault fault);
  const MotorFault& motor_fault() const { return spec_.motor_fault; }
  const std::string& last_stop() const { return last_stop_; }

 protected:
  drivers::protocol::Message handle(const drivers::protocol::Message& request) override;

 private:
  struct Motion {
    int reagent = -1;  ///< index into the bottles; -1: none
    drivers::Duration start{0};
    double volume_ml = 0.0;
    double rate_ml_per_min = 0.0;
    drivers::Duration time_limit{0};
  };
  drivers::Duration motion_end(std::string* why) const;
  double moved_at(drivers::Duration t) const;
  void update();
  void finish(double moved_ml, const std::string& why);
  drivers::protocol::Message status_reply(std::uint32_t sequence) const;

  AuxiliaryDoserSpec spec_;
  std::array<ReagentSpec, 6> bottles_;
  std::array<double, 6> true_added_{};  ///< per reagent, mL
  Motion motion_;
  int last_reagent_ = -1;
  double last_dosed_ml_ = 0.0;
  std::string last_stop_ = "completed";
  bool faulted_ = false;
  drivers::Duration last_contact_{0};
  drivers::Duration host_silence_limit_;
};

}  // namespace veq::simulator
