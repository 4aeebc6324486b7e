#include "drivers/clock.hpp"

#include <cmath>
#include <stdexcept>
#include <string>
#include <thread>

namespace veq::drivers {

void SteadyClock::sleep_for(Duration d) {
  if (d > Duration::zero())
    std::this_thread::sleep_for(d);
}

ScaledClock::ScaledClock(double time_scale)
    : start_(std::chrono::steady_clock::now()), time_scale_(time_scale) {
  if (!std::isfinite(time_scale) || time_scale <= 0.0) {
    throw std::invalid_argument("ScaledClock: time scale must be a finite number above 0, not " +
                                std::to_string(time_scale));
  }
}

Duration ScaledClock::now() const {
  // Through long double: at 100x, a day of nanoseconds times the factor still
  // keeps every digit, so now() never steps backwards through rounding.
  const auto real = std::chrono::steady_clock::now() - start_;
  return Duration(static_cast<Duration::rep>(static_cast<long double>(real.count()) *
                                             static_cast<long double>(time_scale_)));
}

Duration ScaledClock::to_real(Duration d) const {
  return Duration(static_cast<Duration::rep>(
      std::ceil(static_cast<long double>(d.count()) / static_cast<long double>(time_scale_))));
}

void ScaledClock::sleep_for(Duration d) {
  if (d > Duration::zero())
    std::this_thread::sleep_for(to_real(d));
}

}  // namespace veq::drivers
