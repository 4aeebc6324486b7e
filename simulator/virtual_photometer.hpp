// A virtual photometer dipping into the vessel: absorbance by the
// Beer-Lambert law, A = b * sum(epsilon_i(lambda) * c_i), from the free metal,
// the 1:1 complex and the free titrant of the exact 1:1 chemistry
// (chemistry/one_to_one.hpp), relative to a zero reference, with seeded noise.
#pragma once

#include <functional>

#include "chemistry/one_to_one.hpp"
#include "simulator/virtual_device.hpp"

namespace veq::simulator {

/// Concentrations in the vessel after adding titrant (mol/L).
struct VesselSpecies {
  double free_metal_mol_per_l = 0.0;    ///< [M'], not bound by the titrant
  double complex_mol_per_l = 0.0;       ///< [MY]
  double free_titrant_mol_per_l = 0.0;  ///< [Y'], not bound to the metal
};

/// The three species from the exact 1:1 equilibrium and the mass balances
/// C_M = [M'] + [MY], C_Y = [Y'] + [MY], both totals diluted to the vessel's
/// volume (sample + titrant).
VesselSpecies vessel_species(const chemistry::OneToOneTitration& t, double titrant_ml);

/// Molar absorptivity of a band at a wavelength, L/(mol cm).
double band_epsilon(const AbsorptionBand& band, double wavelength_nm);

class VirtualPhotometer final : public VirtualDevice {
 public:
  /// titrant_ml: titrant truly in the vessel now; other_liquid_ml: other
  /// liquid added (diluting), may be empty.
  VirtualPhotometer(const PhotometerSpec& spec, const chemistry::OneToOneTitration& chemistry,
                    drivers::Clock& clock, std::uint64_t seed, std::function<double()> titrant_ml,
                    std::function<double()> other_liquid_ml = {});

  /// Noise-free absorbance against the lamp (the cell's baseline included)
  /// at a wavelength and the present volumes.
  double true_absorbance(double wavelength_nm) const;
  double wavelength_nm() const { return wavelength_nm_; }

 protected:
  drivers::protocol::Message handle(const drivers::protocol::Message& request) override;

 private:
  double noise();

  PhotometerSpec spec_;
  chemistry::OneToOneTitration chemistry_;
  std::function<double()> titrant_ml_;
  std::function<double()> other_liquid_ml_;
  double wavelength_nm_;
  double reference_absorbance_ = 0.0;  ///< the zero reference against the lamp
};

}  // namespace veq::simulator
