// A virtual balance: a load that settles on the display with a first-order
// lag, seeded noise, readability, tare and capacity. It can stand under the
// burette's outlet, so that a burette is checked by weighing what it delivers.
#pragma once

#include <functional>

#include "simulator/virtual_device.hpp"

namespace veq::simulator {

class VirtualBalance final : public VirtualDevice {
 public:
  /// burette_true_ml: the burette's truly delivered volume (used when the
  /// spec says the balance receives the burette's output); may be empty.
  VirtualBalance(const BalanceSpec& spec, drivers::Clock& clock, std::uint64_t seed,
                 std::function<double()> burette_true_ml = {});

  /// Puts a mass on the pan (or takes it off, if negative), g.
  void place(double mass_g) { placed_g_ += mass_g; }
  /// The true gross load on the pan now (without the balance's errors), g.
  double load_g() const;

 protected:
  drivers::protocol::Message handle(const drivers::protocol::Message& request) override;

 private:
  /// The settling display, gross, noise-free, at the present time (g).
  double settle();
  /// What the display settles to: the load with the balance's hidden errors, g.
  double shown_target_g() const;

  BalanceSpec spec_;
  std::function<double()> burette_true_ml_;
  double placed_g_ = 0.0;
  double tare_g_ = 0.0;
  double shown_g_ = 0.0;
  bool started_ = false;
  drivers::Duration last_time_{0};
};

}  // namespace veq::simulator
