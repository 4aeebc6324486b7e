#include "simulator/virtual_photometer.hpp"

#include <algorithm>
#include <cmath>
#include <utility>

#include "simulator/virtual_electrode.hpp"

namespace veq::simulator {

namespace protocol = drivers::protocol;

VesselSpecies vessel_species(const chemistry::OneToOneTitration& t, double titrant_ml) {
  const double volume_ml = t.sample_volume_ml + titrant_ml;
  const double metal_total = t.metal_conc_mol_per_l * t.sample_volume_ml / volume_ml;
  const double titrant_total = t.titrant_conc_mol_per_l * titrant_ml / volume_ml;
  VesselSpecies s;
  s.free_metal_mol_per_l = chemistry::free_metal_mol_per_l(t, titrant_ml);
  s.complex_mol_per_l = std::max(0.0, metal_total - s.free_metal_mol_per_l);
  s.free_titrant_mol_per_l = std::max(0.0, titrant_total - s.complex_mol_per_l);
  return s;
}

double band_epsilon(const AbsorptionBand& band, double wavelength_nm) {
  const double z = (wavelength_nm - band.peak_nm) / band.width_nm;
  return band.epsilon_l_per_mol_cm * std::exp(-0.5 * z * z);
}

VirtualPhotometer::VirtualPhotometer(const PhotometerSpec& spec,
                                     const chemistry::OneToOneTitration& chemistry,
                                     drivers::Clock& clock, std::uint64_t seed,
                                     std::function<double()> titrant_ml,
                                     std::function<double()> other_liquid_ml)
    : VirtualDevice(clock, seed),
      spec_(spec),
      chemistry_(chemistry),
      titrant_ml_(std::move(titrant_ml)),
      other_liquid_ml_(std::move(other_liquid_ml)),
      wavelength_nm_(spec.wavelength_nm) {}

double VirtualPhotometer::true_absorbance(double wavelength_nm) const {
  const auto t = diluted(chemistry_, other_liquid_ml_);
  const VesselSpecies c = vessel_species(t, titrant_ml_ ? titrant_ml_() : 0.0);
  // Beer-Lambert: A = b * sum(epsilon_i * c_i).
  return spec_.baseline_absorbance +
         spec_.path_length_cm *
             (band_epsilon(spec_.metal, wavelength_nm) * c.free_metal_mol_per_l +
              band_epsilon(spec_.complex, wavelength_nm) * c.complex_mol_per_l +
              band_epsilon(spec_.titrant, wavelength_nm) * c.free_titrant_mol_per_l);
}

double VirtualPhotometer::noise() {
  if (spec_.noise_absorbance <= 0.0)
    return 0.0;
  std::normal_distribution<double> n(0.0, spec_.noise_absorbance);
  return n(random_);
}

protocol::Message VirtualPhotometer::handle(const protocol::Message& request) {
  const auto seq = request.sequence;
  const std::string& word = request.word;
  if (word == "identify") {
    protocol::Message m = protocol::ok_reply(seq);
    m.add("role", "photometric_sensor");
    m.add("model", spec_.model);
    m.add("protocol", std::to_string(protocol::kRevision));
    m.add("min_wavelength_nm", spec_.min_wavelength_nm, 1);
    m.add("max_wavelength_nm", spec_.max_wavelength_nm, 1);
    m.add("path_length_cm", spec_.path_length_cm, 3);
    m.add("serial_number", spec_.serial_number);
    m.add("features", "wavelength,zero,ping");
    return m;
  }
  if (word == "wavelength") {
    auto nm = request.number("nm");
    if (!nm || *nm < spec_.min_wavelength_nm - 1e-9 || *nm > spec_.max_wavelength_nm + 1e-9) {
      return protocol::error_reply(
          seq, "over_limit",
          "nm must lie from " + protocol::format_number(spec_.min_wavelength_nm, 1) + " to " +
              protocol::format_number(spec_.max_wavelength_nm, 1));
    }
    wavelength_nm_ = *nm;
    return protocol::ok_reply(seq);
  }
  if (word == "zero") {
    reference_absorbance_ = true_absorbance(wavelength_nm_) + noise();
    return protocol::ok_reply(seq);
  }
  if (word == "read") {
    const double a = true_absorbance(wavelength_nm_) - reference_absorbance_ + noise();
    protocol::Message m = protocol::ok_reply(seq);
    m.add("absorbance", a, 5);
    m.add("transmittance_percent", 100.0 * std::pow(10.0, -a), 4);
    m.add("wavelength_nm", wavelength_nm_, 1);
    return m;
  }
  if (word == "ping")
    return protocol::ok_reply(seq);
  return protocol::error_reply(seq, "unknown_command", "no command '" + word + "'");
}

}  // namespace veq::simulator
