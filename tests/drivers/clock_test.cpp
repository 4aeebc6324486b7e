// The scaled real clock: time runs at a constant multiple of steady time.
#include <gtest/gtest.h>

#include <chrono>
#include <cmath>
#include <limits>
#include <stdexcept>
#include <thread>

#include "drivers/clock.hpp"

namespace veq::drivers {
namespace {

using namespace std::chrono_literals;

TEST(ScaledClock, RunsAtItsFactorOfSteadyTime) {
  ScaledClock clock(20.0);
  const auto real_start = std::chrono::steady_clock::now();
  const Duration start = clock.now();
  std::this_thread::sleep_for(20ms);
  const Duration end = clock.now();
  const auto real_end = std::chrono::steady_clock::now();
  // The clock's interval lies inside the real one and spans the 20 ms sleep,
  // so these bounds hold however loaded the machine is.
  EXPECT_GE(end - start, 20 * Duration(20ms));
  EXPECT_LE(end - start, 20 * (real_end - real_start) + Duration(1));
}

TEST(ScaledClock, SleepsTheScaledDownRealTime) {
  ScaledClock clock(50.0);
  EXPECT_EQ(clock.to_real(Duration(1s)), Duration(20ms));
  const auto real_start = std::chrono::steady_clock::now();
  const Duration start = clock.now();
  clock.sleep_for(Duration(2s));  // 40 ms of real time
  const auto real_waited = std::chrono::steady_clock::now() - real_start;
  EXPECT_GE(real_waited, 40ms);
  EXPECT_GE(clock.now() - start, Duration(2s));
  // Far below the unscaled two seconds, with room for a loaded machine.
  EXPECT_LT(real_waited, 1500ms);
}

TEST(ScaledClock, FactorOneIsRealTime) {
  ScaledClock clock;
  EXPECT_EQ(clock.time_scale(), 1.0);
  EXPECT_EQ(clock.to_real(Duration(5ms)), Duration(5ms));
}

TEST(ScaledClock, NeverStepsBackwards) {
  ScaledClock clock(37.5);
  Duration last = clock.now();
  for (int i = 0; i < 1000; ++i) {
    const Duration t = clock.now();
    ASSERT_GE(t, last);
    last = t;
  }
}

TEST(ScaledClock, RefusesAFactorThatIsNotAPositiveNumber) {
  EXPECT_THROW(ScaledClock(0.0), std::invalid_argument);
  EXPECT_THROW(ScaledClock(-2.0), std::invalid_argument);
  EXPECT_THROW(ScaledClock{std::numeric_limits<double>::quiet_NaN()}, std::invalid_argument);
  EXPECT_THROW(ScaledClock{std::numeric_limits<double>::infinity()}, std::invalid_argument);
}

}  // namespace
}  // namespace veq::drivers
