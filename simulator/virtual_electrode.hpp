// A virtual metal-ion electrode with its meter: Nernstian response to the
// free metal computed by the chemistry engine, temperature in the slope,
// first-order response lag and seeded Gaussian noise.
#pragma once

#include <functional>

#include "chemistry/one_to_one.hpp"
#include "simulator/virtual_device.hpp"

namespace veq::simulator {

/// The titration with the sample diluted by other liquid added to the
/// vessel (mL, from the function; none if it is empty).
chemistry::OneToOneTitration diluted(const chemistry::OneToOneTitration& t,
                                     const std::function<double()>& other_liquid_ml);

/// Nernst slope RT ln(10) / F in mV per decade at a temperature (°C), from the
/// CODATA 2018 values of R and F.
double nernst_slope_mv(double temperature_c);

class VirtualElectrode final : public VirtualDevice {
 public:
  /// titrant_in_vessel_ml tells how much titrant has truly entered the vessel
  /// at the clock's present time (the burette's hidden truth).
  /// reaction_time_s: time constant of a slow complexation (0: instant).
  VirtualElectrode(const ElectrodeSpec& spec, const chemistry::OneToOneTitration& chemistry,
                   int metal_charge, double reaction_time_s, drivers::Clock& clock,
                   std::uint64_t seed, std::function<double()> titrant_in_vessel_ml);

  /// Noise-free equilibrium potential at a titrant volume in the vessel (mV).
  double equilibrium_potential_mv(double titrant_ml) const;

  /// Other liquid added to the vessel (auxiliary reagents, mL), which dilutes
  /// the sample; none unless set.
  void set_other_liquid(std::function<double()> added_ml) {
    other_liquid_ml_ = std::move(added_ml);
  }

 protected:
  drivers::protocol::Message handle(const drivers::protocol::Message& request) override;
  drivers::protocol::Message reading() override;

 private:
  double lagged_potential_mv();

  ElectrodeSpec spec_;
  chemistry::OneToOneTitration chemistry_;
  int charge_;
  double reaction_time_s_;
  std::function<double()> titrant_in_vessel_ml_;
  std::function<double()> other_liquid_ml_;
  double reacted_ml_ = 0.0;  ///< titrant that has reacted so far (slow metals), mL
  bool started_ = false;
  double value_mv_ = 0.0;
  drivers::Duration last_time_{0};
};

}  // namespace veq::simulator
