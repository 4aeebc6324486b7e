// A virtual photometer dipping into the vessel: absorbance by the
// Beer-Lambert law, A = b * sum(epsilon_i(lambda) * c_i), from the vessel's
// chemistry (the bands of the scenario over the 1:1 species, or the
// constants library's absorptivities of the indicator over the general
// equilibrium), seen through stray light, relative to a zero reference, with
// seeded noise and the sensor faults; or a stored curve replayed.
#pragma once

#include <functional>
#include <map>

#include "simulator/vessel.hpp"
#include "simulator/virtual_device.hpp"

namespace veq::simulator {

/// Molar absorptivity of a band at a wavelength, L/(mol cm).
double band_epsilon(const AbsorptionBand& band, double wavelength_nm);

/// What a photometer with stray light shows for a true absorbance:
/// A = -log10((T + s) / (1 + s)), T = 10^-A(true), s the stray fraction.
double with_stray_light(double true_absorbance, double stray_fraction);

class VirtualPhotometer final : public VirtualDevice {
 public:
  /// titrant_ml: titrant truly in the vessel now; additions: what else has
  /// entered it (its titrant_ml ignored), may be empty.
  VirtualPhotometer(const PhotometerSpec& spec, const Scenario& scenario, drivers::Clock& clock,
                    std::uint64_t seed, std::function<double()> titrant_ml,
                    std::function<VesselContent()> additions = {});

  /// Noise-free absorbance against the lamp (the cell's baseline and the
  /// stray light included) at a wavelength and the present volumes.
  double true_absorbance(double wavelength_nm) const;
  double wavelength_nm() const { return wavelength_nm_; }
  /// Looks into another vessel (a sample changer's head came down): its
  /// chemistry from now on. The zero reference stays as it was taken.
  void set_vessel(const Scenario& vessel) {
    scenario_ = vessel;
    vessels_.clear();
  }
  /// Serves a stored curve (absorbance against the zero) instead.
  void set_replay(ReplaySpec replay) { replay_ = std::move(replay); }

 protected:
  drivers::protocol::Message handle(const drivers::protocol::Message& request) override;

 private:
  double noise();
  /// The vessel as seen at a wavelength (one model per wavelength asked for).
  VesselModel& vessel_at(double wavelength_nm) const;

  PhotometerSpec spec_;
  Scenario scenario_;
  mutable std::map<double, VesselModel> vessels_;
  std::function<double()> titrant_ml_;
  std::function<VesselContent()> additions_;
  ReplaySpec replay_;
  double wavelength_nm_;
  double reference_absorbance_ = 0.0;  ///< the zero reference against the lamp
};

}  // namespace veq::simulator
