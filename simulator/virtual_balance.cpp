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

double VirtualBalance::settle() {
  const auto now = clock_.now();
  const double target = load_g();
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
    const double shown = settle();
    const bool stable = std::fabs(shown - load_g()) <= spec_.stable_band_g;
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
