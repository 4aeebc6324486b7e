// A virtual stirrer: the speed ramps towards its target; above a set speed
// the stir bar decouples, stops and the stirrer reports "stalled".
#pragma once

#include "simulator/virtual_device.hpp"

namespace veq::simulator {

class VirtualStirrer final : public VirtualDevice {
 public:
  VirtualStirrer(const StirrerSpec& spec, drivers::Clock& clock, std::uint64_t seed);

  /// Speed now, rpm.
  double speed_rpm() const;
  double target_rpm() const { return target_rpm_; }
  bool decoupled() const;

 protected:
  drivers::protocol::Message handle(const drivers::protocol::Message& request) override;

 private:
  /// The ramped speed at time t, ignoring decoupling (rpm).
  double ramped(drivers::Duration t) const;

  StirrerSpec spec_;
  double from_rpm_ = 0.0;  ///< speed when the target last changed
  double target_rpm_ = 0.0;
  drivers::Duration changed_{0};
};

}  // namespace veq::simulator
