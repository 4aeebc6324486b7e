// A virtual sample changer: a rack of positions, a head carried from one to
// another (raised only), lowered and raised, and a rinse pump; motions take
// time computed from the clock; a position can be blocked.
#pragma once

#include "simulator/virtual_device.hpp"

namespace veq::simulator {

class VirtualSampleChanger final : public VirtualDevice {
 public:
  VirtualSampleChanger(const SampleChangerSpec& spec, drivers::Clock& clock, std::uint64_t seed);

  int position() const { return position_; }
  bool head_down() const { return head_down_; }
  bool moving() const;
  /// Seconds of rinsing so far, in total (s).
  double rinsed_s() const;
  /// Books a motion that has ended by the clock's present time (the device
  /// itself does so when it next answers; the bench asks before any of its
  /// devices answers, so that a vessel changes when the head comes down).
  void refresh() { update(); }
  /// How many times the head has come fully down so far.
  int lowerings() const { return lowerings_; }

 protected:
  drivers::protocol::Message handle(const drivers::protocol::Message& request) override;

 private:
  enum class MotionKind { none, carry, lower, raise, rinse };
  struct Motion {
    MotionKind kind = MotionKind::none;
    drivers::Duration start{0};
    drivers::Duration length{0};
    int target = 0;        ///< carry: where it will stop
    bool blocked = false;  ///< carry: stops short of a blocked position
  };
  void update();
  void finish(drivers::Duration at, bool stopped);
  drivers::protocol::Message status_reply(std::uint32_t sequence) const;

  SampleChangerSpec spec_;
  int position_ = 1;
  bool head_down_ = false;
  Motion motion_;
  std::string fault_ = "none";
  double rinsed_s_ = 0.0;
  int lowerings_ = 0;
};

}  // namespace veq::simulator
