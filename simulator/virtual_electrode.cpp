#include "simulator/virtual_electrode.hpp"

#include <cmath>
#include <stdexcept>
#include <utility>

namespace veq::simulator {

namespace protocol = drivers::protocol;

double nernst_slope_mv(double temperature_c) {
  // R = 8.314462618 J/(mol K), F = 96485.33212 C/mol (CODATA 2018, exact SI).
  constexpr double kR = 8.314462618;
  constexpr double kF = 96485.33212;
  return 1000.0 * kR * (temperature_c + 273.15) * std::log(10.0) / kF;
}

double nikolsky_eisenman_mv(double e0_mv, double slope_mv, int charge, double log10_activity,
                            const std::vector<double>& coefficients,
                            const std::vector<int>& other_charges,
                            const std::vector<double>& other_log10_activities) {
  // Summed relative to a_i so that activities far below 1e-300 lose nothing:
  // log10(a_i + sum) = log10 a_i + log10(1 + sum / a_i).
  double relative = 1.0;
  for (std::size_t j = 0; j < coefficients.size(); ++j) {
    const double log_term = std::log10(coefficients[j]) + static_cast<double>(charge) /
                                                              other_charges[j] *
                                                              other_log10_activities[j];
    relative += std::pow(10.0, log_term - log10_activity);
  }
  return e0_mv + slope_mv / charge * (log10_activity + std::log10(relative));
}

VirtualElectrode::VirtualElectrode(const ElectrodeSpec& spec, VesselModel vessel,
                                   double reaction_time_s, drivers::Clock& clock,
                                   std::uint64_t seed, std::function<double()> titrant_in_vessel_ml)
    : VirtualDevice(clock, seed),
      spec_(spec),
      vessel_(std::move(vessel)),
      reaction_time_s_(reaction_time_s),
      titrant_in_vessel_ml_(std::move(titrant_in_vessel_ml)) {
  find_metals();
}

void VirtualElectrode::set_vessel(VesselModel vessel, double reaction_time_s) {
  vessel_ = std::move(vessel);
  reaction_time_s_ = reaction_time_s;
  started_ = false;
  find_metals();
}

void VirtualElectrode::find_metals() {
  interferents_.clear();
  coefficients_.clear();
  metal_ = vessel_.metal_index(spec_.metal);
  if (metal_ < 0)
    throw std::invalid_argument("electrode.metal '" + spec_.metal + "' is not in the vessel");
  for (const Interferent& f : spec_.interferents) {
    const int j = vessel_.metal_index(f.metal);
    // A 1:1 vessel (a rack's water on the balance) holds no other metals.
    if (j < 0 && !vessel_.general())
      continue;
    if (j < 0 || f.metal.empty())
      throw std::invalid_argument("electrode interferent '" + f.metal + "' is not in the vessel");
    interferents_.push_back(j);
    coefficients_.push_back(f.coefficient);
  }
}

double VirtualElectrode::equilibrium_potential_mv(double titrant_ml) const {
  if (replay_.present)
    return replay_signal(replay_, titrant_ml, nullptr);
  VesselContent content = additions_ ? additions_() : VesselContent{};
  content.titrant_ml = titrant_ml;
  if (auto r = vessel_.solve(content); !r)
    throw std::runtime_error("virtual electrode: " + r.error().message);
  const double slope = nernst_slope_mv(spec_.temperature_c) * spec_.slope_percent / 100.0;
  std::vector<int> charges;
  std::vector<double> activities;
  for (int j : interferents_) {
    charges.push_back(vessel_.metal_charge(j));
    activities.push_back(vessel_.log10_activity(j));
  }
  double log10_activity = vessel_.log10_activity(metal_);
  if (spec_.detection_limit_mol_per_l > 0.0) {
    // Below its detection limit the membrane sees its own leached ions.
    log10_activity = std::log10(std::pow(10.0, log10_activity) + spec_.detection_limit_mol_per_l);
  }
  // A cation-selective electrode: E = E0 + (S / z) log10 a = E0 - (S / z) pM.
  return nikolsky_eisenman_mv(spec_.e0_mv, slope, vessel_.metal_charge(metal_), log10_activity,
                              coefficients_, charges, activities);
}

double VirtualElectrode::lagged_potential_mv() {
  const auto now = clock_.now();
  const double dt = started_ ? drivers::to_seconds(now - last_time_) : 0.0;
  const double delivered = titrant_in_vessel_ml_();
  // Mixing: a dose reaches the electrode's surface with its own time constant.
  if (!started_ || spec_.mixing_time_s <= 0.0) {
    mixed_ml_ = delivered;
  } else {
    mixed_ml_ = delivered + (mixed_ml_ - delivered) * std::exp(-dt / spec_.mixing_time_s);
  }
  // A slow complexation: the titrant that has reacted approaches the titrant
  // mixed in with its own time constant (first order in what is left).
  if (!started_ || reaction_time_s_ <= 0.0) {
    reacted_ml_ = mixed_ml_;
  } else {
    reacted_ml_ = mixed_ml_ + (reacted_ml_ - mixed_ml_) * std::exp(-dt / reaction_time_s_);
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

bool VirtualElectrode::measure(double& e) {
  if (replay_.present) {
    bool outside = false;
    e = replay_signal(replay_, titrant_in_vessel_ml_(), &outside);
    if (outside && replay_.outside == ReplayOutside::fault)
      return false;
  } else {
    // The reference drifts steadily with the device's time.
    e = lagged_potential_mv() + spec_.drift_mv_per_min * clock_.now_s() / 60.0;
    if (spec_.noise_mv > 0.0) {
      std::normal_distribution<double> noise(0.0, spec_.noise_mv);
      e += noise(random_);
    }
  }
  // 50 mV: a spike as big as a good break, impossible to miss.
  return sensor_faults(e, 50.0);
}

protocol::Message VirtualElectrode::reading() {
  double e = 0.0;
  const bool in_range = measure(e);
  protocol::Message m;
  // A streamed reading out of range carries no potential: the meter shows
  // its over-range sign, which this protocol sends as a missing field.
  if (in_range)
    m.add("potential_mv", e, 3);
  m.add("temperature_c", spec_.temperature_c, 2);
  if (auto ph = measured_ph())
    m.add("ph", *ph, 3);
  return m;
}

std::optional<double> VirtualElectrode::measured_ph() {
  // The pH of the vessel as last solved for the potential (a replayed
  // curve has no vessel to read).
  if (!spec_.reports_ph || replay_.present)
    return std::nullopt;
  double ph = vessel_.ph();
  if (spec_.ph_noise > 0.0) {
    std::normal_distribution<double> noise(0.0, spec_.ph_noise);
    ph += noise(random_);
  }
  return ph;
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
    double e = 0.0;
    if (!measure(e)) {
      return protocol::error_reply(seq, "over_limit",
                                   replay_.present
                                       ? "the titrant volume lies outside the replayed curve"
                                       : "the potential is outside the meter's range");
    }
    protocol::Message m = protocol::ok_reply(seq);
    m.add("potential_mv", e, 3);
    m.add("temperature_c", spec_.temperature_c, 2);
    if (auto ph = measured_ph())
      m.add("ph", *ph, 3);
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
