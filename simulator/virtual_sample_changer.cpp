#include "simulator/virtual_sample_changer.hpp"

#include <algorithm>
#include <cmath>
#include <cstdlib>

namespace veq::simulator {

namespace protocol = drivers::protocol;
using drivers::Duration;

VirtualSampleChanger::VirtualSampleChanger(const SampleChangerSpec& spec, drivers::Clock& clock,
                                           std::uint64_t seed)
    : VirtualDevice(clock, seed), spec_(spec) {}

bool VirtualSampleChanger::moving() const {
  return motion_.kind != MotionKind::none && clock_.now() < motion_.start + motion_.length;
}

double VirtualSampleChanger::rinsed_s() const {
  double total = rinsed_s_;
  if (motion_.kind == MotionKind::rinse)
    total +=
        drivers::to_seconds(std::min(clock_.now(), motion_.start + motion_.length) - motion_.start);
  return total;
}

void VirtualSampleChanger::update() {
  if (motion_.kind != MotionKind::none && clock_.now() >= motion_.start + motion_.length)
    finish(motion_.start + motion_.length, false);
}

void VirtualSampleChanger::finish(Duration at, bool stopped) {
  switch (motion_.kind) {
    case MotionKind::carry: {
      if (!stopped) {
        position_ = motion_.target;
        if (motion_.blocked)
          fault_ = "blocked";
      } else {
        // Stopped on the way: at the last position passed.
        const int passed = static_cast<int>(std::floor(drivers::to_seconds(at - motion_.start) /
                                                       std::max(1e-9, spec_.seconds_per_position)));
        position_ += (motion_.target > position_ ? 1 : -1) *
                     std::min(passed, std::abs(motion_.target - position_));
      }
      break;
    }
    case MotionKind::lower:
      head_down_ = !stopped;
      if (head_down_)
        ++lowerings_;
      break;
    case MotionKind::raise:
      head_down_ = stopped;
      break;
    case MotionKind::rinse:
      rinsed_s_ += drivers::to_seconds(at - motion_.start);
      break;
    case MotionKind::none:
      break;
  }
  motion_ = Motion{};
}

protocol::Message VirtualSampleChanger::status_reply(std::uint32_t sequence) const {
  protocol::Message m = protocol::ok_reply(sequence);
  const char* state = "idle";
  int position = position_;
  const char* head = head_down_ ? "down" : "up";
  switch (motion_.kind) {
    case MotionKind::carry:
      state = "moving";
      position = 0;
      break;
    case MotionKind::lower:
    case MotionKind::raise:
      state = "moving";
      head = "between";
      break;
    case MotionKind::rinse:
      state = "rinsing";
      break;
    case MotionKind::none:
      break;
  }
  if (fault_ != "none")
    state = "fault";
  m.add("state", state);
  m.add("position", std::to_string(position));
  m.add("head", head);
  m.add("fault", fault_);
  return m;
}

protocol::Message VirtualSampleChanger::handle(const protocol::Message& request) {
  update();
  const auto seq = request.sequence;
  const std::string& word = request.word;
  if (word == "identify") {
    protocol::Message m = protocol::ok_reply(seq);
    m.add("role", "sample_changer");
    m.add("model", spec_.model);
    m.add("protocol", std::to_string(protocol::kRevision));
    m.add("positions", std::to_string(spec_.positions));
    m.add("rinse", spec_.rinse ? "yes" : "no");
    m.add("serial_number", spec_.serial_number);
    m.add("features", spec_.rinse ? "rinse,stop,ping" : "stop,ping");
    return m;
  }
  if (word == "status")
    return status_reply(seq);
  if (word == "stop") {
    if (motion_.kind != MotionKind::none)
      finish(clock_.now(), true);
    auto reply = status_reply(seq);
    fault_ = "none";
    return reply;
  }
  if (word == "ping")
    return protocol::ok_reply(seq);
  if (word == "move" || word == "lower" || word == "raise" || word == "rinse") {
    if (motion_.kind != MotionKind::none)
      return protocol::error_reply(seq, "busy", "still moving");
    Motion m;
    m.start = clock_.now();
    if (word == "move") {
      auto target = request.number("position");
      if (!target || *target < 1 || *target > spec_.positions || std::floor(*target) != *target) {
        return protocol::error_reply(
            seq, "bad_field",
            "position must be a whole number from 1 to " + std::to_string(spec_.positions));
      }
      if (head_down_)
        return protocol::error_reply(seq, "bad_state", "the head is down; raise it first");
      int stop_at = static_cast<int>(*target);
      const int b = spec_.blocked_position;
      const bool blocked = b > 0 && b != position_ &&
                           ((b > position_ && b <= stop_at) || (b < position_ && b >= stop_at));
      if (blocked)
        stop_at = b > position_ ? b - 1 : b + 1;
      m.kind = MotionKind::carry;
      m.target = stop_at;
      m.length = drivers::from_seconds(std::abs(stop_at - position_) * spec_.seconds_per_position);
      // A blocked move is refused by the mechanism, not by the command: it
      // runs as far as it can and the fault shows in the status.
      m.blocked = blocked;
    } else if (word == "lower" || word == "raise") {
      if ((word == "lower") == head_down_)
        return protocol::ok_reply(seq);  // already there
      m.kind = word == "lower" ? MotionKind::lower : MotionKind::raise;
      m.length = drivers::from_seconds(spec_.lift_time_s);
    } else {
      if (!spec_.rinse)
        return protocol::error_reply(seq, "unknown_command", "this changer has no rinse pump");
      auto seconds = request.number("seconds");
      if (!seconds || *seconds <= 0.0 || *seconds > 600.0)
        return protocol::error_reply(seq, "bad_field", "seconds must be above 0 and at most 600");
      m.kind = MotionKind::rinse;
      m.length = drivers::from_seconds(*seconds);
    }
    motion_ = m;
    update();
    return protocol::ok_reply(seq);
  }
  return protocol::error_reply(seq, "unknown_command", "no command '" + word + "'");
}

}  // namespace veq::simulator
