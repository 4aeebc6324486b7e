// Time for a run: a clock interface, a real steady clock, a scaled real clock
// for demonstrations faster than real time, and a virtual clock that advances
// only when the run waits.
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

/// Real time run faster (or slower) by a constant factor: now() is the real
/// steady time since construction multiplied by the factor, and sleep_for(d)
/// sleeps d divided by it. A host and a simulator that each own a ScaledClock
/// with the same factor agree on how fast time passes (not on its origin),
/// which is all a titration needs: a 20x demo doses, settles and times out in
/// a twentieth of the real time, over real serial lines. Safe to read from
/// several threads (now() only reads immutable state).
class ScaledClock final : public Clock {
 public:
  /// time_scale: clock seconds per real second (> 0 and finite; 1 = real time).
  /// Throws std::invalid_argument otherwise (a programming error: options from
  /// users are checked where they are read).
  explicit ScaledClock(double time_scale = 1.0);
  Duration now() const override;
  void sleep_for(Duration d) override;

  /// Clock seconds per real second.
  double time_scale() const { return time_scale_; }
  /// The real duration that lasts d on this clock (ns).
  Duration to_real(Duration d) const;

 private:
  std::chrono::steady_clock::time_point start_;
  double time_scale_;
};

}  // namespace veq::drivers
