#include "simulator/virtual_photometer.hpp"

#include <algorithm>
#include <cmath>
#include <utility>

#include <stdexcept>

namespace veq::simulator {

namespace protocol = drivers::protocol;

double band_epsilon(const AbsorptionBand& band, double wavelength_nm) {
  const double z = (wavelength_nm - band.peak_nm) / band.width_nm;
  return band.epsilon_l_per_mol_cm * std::exp(-0.5 * z * z);
}

double with_stray_light(double true_absorbance, double stray_fraction) {
  const double t = std::pow(10.0, -true_absorbance);
  return -std::log10((t + stray_fraction) / (1.0 + stray_fraction));
}

VirtualPhotometer::VirtualPhotometer(const PhotometerSpec& spec, const Scenario& scenario,
                                     drivers::Clock& clock, std::uint64_t seed,
                                     std::function<double()> titrant_ml,
                                     std::function<VesselContent()> additions)
    : VirtualDevice(clock, seed),
      spec_(spec),
      scenario_(scenario),
      titrant_ml_(std::move(titrant_ml)),
      additions_(std::move(additions)),
      wavelength_nm_(spec.wavelength_nm) {}

VesselModel& VirtualPhotometer::vessel_at(double wavelength_nm) const {
  auto it = vessels_.find(wavelength_nm);
  if (it == vessels_.end()) {
    auto v = VesselModel::create(scenario_, wavelength_nm);
    if (!v)
      throw std::runtime_error("virtual photometer: " + v.error().message);
    it = vessels_.emplace(wavelength_nm, std::move(*v)).first;
  }
  return it->second;
}

double VirtualPhotometer::true_absorbance(double wavelength_nm) const {
  VesselContent content = additions_ ? additions_() : VesselContent{};
  content.titrant_ml = titrant_ml_ ? titrant_ml_() : 0.0;
  VesselModel& vessel = vessel_at(wavelength_nm);
  if (auto r = vessel.solve(content); !r)
    throw std::runtime_error("virtual photometer: " + r.error().message);
  double sample_absorbance = 0.0;
  if (vessel.general()) {
    // The library's absorptivities over the general equilibrium; none listed
    // at this wavelength: the sample does not absorb there.
    sample_absorbance = vessel.absorbance().value_or(0.0) * spec_.path_length_cm /
                        vessel.model()->sample().signal.path_length_cm;
  } else {
    const VesselSpecies& c = vessel.one_to_one_species();
    // Beer-Lambert: A = b * sum(epsilon_i * c_i).
    sample_absorbance = spec_.path_length_cm *
                        (band_epsilon(spec_.metal, wavelength_nm) * c.free_metal_mol_per_l +
                         band_epsilon(spec_.complex, wavelength_nm) * c.complex_mol_per_l +
                         band_epsilon(spec_.titrant, wavelength_nm) * c.free_titrant_mol_per_l);
  }
  return with_stray_light(spec_.baseline_absorbance + sample_absorbance,
                          spec_.stray_light_fraction);
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
    if (!replay_.present)
      reference_absorbance_ = true_absorbance(wavelength_nm_) + noise();
    return protocol::ok_reply(seq);
  }
  if (word == "read") {
    double a = 0.0;
    bool outside = false;
    if (replay_.present) {
      a = replay_signal(replay_, titrant_ml_ ? titrant_ml_() : 0.0, &outside);
      outside = outside && replay_.outside == ReplayOutside::fault;
    } else {
      a = true_absorbance(wavelength_nm_) - reference_absorbance_ + noise();
    }
    // 0.5 absorbance: a bubble or a fibre in the light path.
    if (!sensor_faults(a, 0.5) || outside) {
      return protocol::error_reply(seq, "over_limit",
                                   outside ? "the titrant volume lies outside the replayed curve"
                                           : "the absorbance is outside the photometer's range");
    }
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
