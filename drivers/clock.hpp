// Time for a run: a clock interface, a real steady clock and a virtual clock
// that advances only when the run waits.
#pragma once

#include <atomic>
#include <chrono>

namespace veq::drivers {

/// Monotonic time since the clock's start, in nanoseconds.
using Duration = std::chrono::nanoseconds;

/// Seconds as a double, for records and chemistry (s).
inline double to_seconds(Duration d) {
  return std::chrono::duration<double>(d).count();
}
/// A duration from seconds as a double (s).
inline Duration from_seconds(double s) {
  return std::chrono::duration_cast<Duration>(std::chrono::duration<double>(s));
}

/// The time source of one run. A run owns its clock; simulated instruments in
/// the same process read the same clock, so virtual time stays consistent.
class Clock {
 public:
  virtual ~Clock() = default;
  /// Time since this clock started (monotonic, ns).
  virtual Duration now() const = 0;
  /// Waits for d (real clock) or advances time by d (virtual clock).
  virtual void sleep_for(Duration d) = 0;
  /// Seconds since this clock started (s).
  double now_s() const { return to_seconds(now()); }
};

/// Virtual time: now() moves only when someone sleeps, so a ten-minute
/// titration in memory takes milliseconds and repeats exactly.
class VirtualClock final : public Clock {
 public:
  Duration now() const override { return now_; }
  void sleep_for(Duration d) override {
    if (d > Duration::zero())
      now_ += d;
  }

 private:
  Duration now_{0};
};

/// Real time from std::chrono::steady_clock.
class SteadyClock final : public Clock {
 public:
  SteadyClock() : start_(std::chrono::steady_clock::now()) {}
  Duration now() const override { return std::chrono::steady_clock::now() - start_; }
  void sleep_for(Duration d) override;

 private:
  std::chrono::steady_clock::time_point start_;
};

}  // namespace veq::drivers
