#include "simulator/virtual_electrode.hpp"

#include <cmath>
#include <utility>

namespace veq::simulator {

namespace protocol = drivers::protocol;

chemistry::OneToOneTitration diluted(const chemistry::OneToOneTitration& t,
                                     const std::function<double()>& other_liquid_ml) {
  const double extra = other_liquid_ml ? other_liquid_ml() : 0.0;
  if (!(extra > 0.0))
    return t;
  // The same metal in a larger volume: the sample's concentration scales down.
  chemistry::OneToOneTitration d = t;
  d.metal_conc_mol_per_l =
      t.metal_conc_mol_per_l * t.sample_volume_ml / (t.sample_volume_ml + extra);
  d.sample_volume_ml = t.sample_volume_ml + extra;
  return d;
}

double nernst_slope_mv(double temperature_c) {
  // R = 8.314462618 J/(mol K), F = 96485.33212 C/mol (CODATA 2018, exact SI).
  constexpr double kR = 8.314462618;
  constexpr double kF = 96485.33212;
  return 1000.0 * kR * (temperature_c + 273.15) * std::log(10.0) / kF;
}

VirtualElectrode::VirtualElectrode(const ElectrodeSpec& spec,
                                   const chemistry::OneToOneTitration& chemistry, int metal_charge,
                                   double reaction_time_s, drivers::Clock& clock,
                                   std::uint64_t seed, std::function<double()> titrant_in_vessel_ml)
    : VirtualDevice(clock, seed),
      spec_(spec),
      chemistry_(chemistry),
      charge_(metal_charge),
      reaction_time_s_(reaction_time_s),
      titrant_in_vessel_ml_(std::move(titrant_in_vessel_ml)) {}

double VirtualElectrode::equilibrium_potential_mv(double titrant_ml) const {
  const double slope = nernst_slope_mv(spec_.temperature_c) * spec_.slope_percent / 100.0;
  // E = E0 + (S / z) log10[M] = E0 - (S / z) pM for a cation-selective electrode.
  return spec_.e0_mv -
         slope / charge_ * chemistry::p_metal(diluted(chemistry_, other_liquid_ml_), titrant_ml);
}

double VirtualElectrode::lagged_potential_mv() {
  const auto now = clock_.now();
  const double dt = started_ ? drivers::to_seconds(now - last_time_) : 0.0;
  // A slow complexation: the titrant that has reacted approaches the titrant
  // delivered with its own time constant (first order in what is left).
  const double delivered = titrant_in_vessel_ml_();
  if (!started_ || reaction_time_s_ <= 0.0) {
    reacted_ml_ = delivered;
  } else {
    reacted_ml_ = delivered + (reacted_ml_ - delivered) * std::exp(-dt / reaction_time_s_);
  }
  const double target = equilibrium_potential_mv(reacted_ml_);
  if (!started_ || spec_.response_time_s <= 0.0) {
    value_mv_ = target;
  } else {
    value_mv_ = target + (value_mv_ - target) * std::exp(-dt / spec_.response_time_s);
  }
  started_ = true;
  last_time_ = now;
  return value_mv_;
}

protocol::Message VirtualElectrode::reading() {
  // The reference drifts steadily with the device's time.
  double e = lagged_potential_mv() + spec_.drift_mv_per_min * clock_.now_s() / 60.0;
  if (spec_.noise_mv > 0.0) {
    std::normal_distribution<double> noise(0.0, spec_.noise_mv);
    e += noise(random_);
  }
  protocol::Message m;
  m.add("potential_mv", e, 3);
  m.add("temperature_c", spec_.temperature_c, 2);
  return m;
}

protocol::Message VirtualElectrode::handle(const protocol::Message& request) {
  const auto seq = request.sequence;
  if (request.word == "identify") {
    protocol::Message m = protocol::ok_reply(seq);
    m.add("role", "potential_sensor");
    m.add("model", spec_.model);
    m.add("electrode", spec_.electrode);
    m.add("protocol", std::to_string(protocol::kRevision));
    m.add("serial_number", spec_.serial_number);
    m.add("features", "stream,ping");
    return m;
  }
  if (request.word == "read") {
    protocol::Message m = reading();
    m.sequence = seq;
    m.word = "ok";
    return m;
  }
  if (request.word == "stream") {
    auto interval = request.number("interval_ms");
    if (!interval || *interval < 0.0 || (*interval > 0.0 && *interval < 50.0) ||
        *interval > 60000.0) {
      return protocol::error_reply(seq, "bad_field",
                                   "interval_ms must be 0 (stop) or a number from 50 to 60000");
    }
    stream_every(drivers::from_seconds(*interval / 1000.0));
    return protocol::ok_reply(seq);
  }
  if (request.word == "ping")
    return protocol::ok_reply(seq);
  return protocol::error_reply(seq, "unknown_command", "no command '" + request.word + "'");
}

}  // namespace veq::simulator
