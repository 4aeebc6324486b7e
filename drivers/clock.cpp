#include "drivers/clock.hpp"

#include <thread>

namespace veq::drivers {

void SteadyClock::sleep_for(Duration d) {
  if (d > Duration::zero())
    std::this_thread::sleep_for(d);
}

}  // namespace veq::drivers
