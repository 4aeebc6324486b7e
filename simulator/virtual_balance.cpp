#include "simulator/virtual_balance.hpp"

#include <cmath>
#include <utility>

namespace veq::simulator {

namespace protocol = drivers::protocol;

VirtualBalance::VirtualBalance(const BalanceSpec& spec, drivers::Clock& clock, std::uint64_t seed,
                               std::function<double()> burette_true_ml)
    : VirtualDevice(clock, seed), spec_(spec), burette_true_ml_(std::move(burette_true_ml)) {}

double VirtualBalance::load_g() const {
  double load = spec_.load_g + placed_g_;
  if (spec_.receives_burette && burette_true_ml_)
    load += burette_true_ml_() * spec_.density_g_per_ml;
  return load;
}

double VirtualBalance::shown_target_g() const {
  // The hidden errors of the balance: sensitivity and zero offset.
  return load_g() * (1.0 + spec_.sensitivity_error_percent / 100.0) + spec_.offset_g;
}

double VirtualBalance::settle() {
  const auto now = clock_.now();
  const double target = shown_target_g();
  if (!started_ || spec_.settle_time_s <= 0.0) {
    shown_g_ = target;
  } else {
    const double dt = drivers::to_seconds(now - last_time_);
    shown_g_ = target + (shown_g_ - target) * std::exp(-dt / spec_.settle_time_s);
  }
  started_ = true;
  last_time_ = now;
  return shown_g_;
}

protocol::Message VirtualBalance::handle(const protocol::Message& request) {
  const auto seq = request.sequence;
  const std::string& word = request.word;
  if (word == "identify") {
    protocol::Message m = protocol::ok_reply(seq);
    m.add("role", "balance");
    m.add("model", spec_.model);
    m.add("protocol", std::to_string(protocol::kRevision));
    m.add("capacity_g", spec_.capacity_g, 4);
    m.add("readability_g", spec_.readability_g, 7);
    m.add("serial_number", spec_.serial_number);
    m.add("features", "tare,ping");
    return m;
  }
  if (word == "read" || word == "tare") {
    double shown = settle();
    bool stable = std::fabs(shown - shown_target_g()) <= spec_.stable_band_g;
    if (const FaultPlan* f = active_fault(FaultKind::never_stable)) {
      // A draught or a vessel touching the housing: the display wanders.
      const double size = f->size > 0.0 ? f->size : 0.05;
      std::uniform_real_distribution<double> wander(-size, size);
      shown += wander(random_);
      stable = false;
    }
    if (load_g() > spec_.capacity_g) {
      return protocol::error_reply(
          seq, "over_limit",
          "load above the capacity of " + protocol::format_number(spec_.capacity_g, 2) + " g");
    }
    if (word == "tare") {
      if (!stable)
        return protocol::error_reply(seq, "unstable", "the reading is not stable; tare refused");
      tare_g_ = shown;
      return protocol::ok_reply(seq);
    }
    double net = shown - tare_g_;
    if (spec_.noise_g > 0.0) {
      std::normal_distribution<double> noise(0.0, spec_.noise_g);
      net += noise(random_);
    }
    // The display shows whole steps of its readability.
    net = std::round(net / spec_.readability_g) * spec_.readability_g;
    int decimals = 0;
    while (decimals < 7 && spec_.readability_g * std::pow(10.0, decimals) < 0.999)
      ++decimals;
    protocol::Message m = protocol::ok_reply(seq);
    m.add("mass_g", net, decimals);
    m.add("stable", stable ? "yes" : "no");
    return m;
  }
  if (word == "ping")
    return protocol::ok_reply(seq);
  return protocol::error_reply(seq, "unknown_command", "no command '" + word + "'");
}

}  // namespace veq::simulator
