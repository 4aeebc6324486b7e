#include "simulator/virtual_burette.hpp"

#include <algorithm>
#include <cmath>

namespace veq::simulator {

namespace protocol = drivers::protocol;
using drivers::Duration;

VirtualBurette::VirtualBurette(const BuretteSpec& spec, drivers::Clock& clock, std::uint64_t seed)
    : VirtualDevice(clock, seed),
      spec_(spec),
      step_ml_(spec.cylinder_ml / spec.steps_per_cylinder),
      cylinder_content_ml_(spec.cylinder_ml),
      host_silence_limit_(drivers::from_seconds(kDefaultHostSilenceS)) {}

double VirtualBurette::fill_rate_limit() const {
  return spec_.max_fill_rate_ml_per_min > 0.0 ? spec_.max_fill_rate_ml_per_min
                                              : spec_.max_rate_ml_per_min;
}

Duration VirtualBurette::motion_end(std::string* why) const {
  const Duration planned =
      motion_.start + drivers::from_seconds(motion_.volume_ml / motion_.rate_ml_per_min * 60.0);
  Duration end = planned;
  std::string reason = "completed";
  if (motion_.kind == MotionKind::dose && motion_.time_limit > Duration::zero() &&
      motion_.start + motion_.time_limit < end) {
    end = motion_.start + motion_.time_limit;
    reason = "time_limit";
  }
  // The safeguard an instrument built for veq keeps: no word from the host for
  // the silence limit and the motor stops by itself.
  if (host_silence_limit_ > Duration::zero() && last_contact_ + host_silence_limit_ < end) {
    end = std::max(motion_.start, last_contact_ + host_silence_limit_);
    reason = "host_silence";
  }
  // A mechanical fault (stalled piston, overloaded drive, air drawn from an
  // empty bottle) stops the motor where it is.
  if (spec_.motor_fault.kind != MotorFaultKind::none) {
    const Duration at = drivers::from_seconds(spec_.motor_fault.after_s);
    if (at < end) {
      end = std::max(motion_.start, at);
      reason = "fault";
    }
  }
  if (why)
    *why = reason;
  return end;
}

double VirtualBurette::moved_at(Duration t) const {
  if (motion_.kind == MotionKind::none)
    return 0.0;
  const Duration end = motion_end(nullptr);
  const Duration until = std::min(t, end);
  if (until <= motion_.start)
    return 0.0;
  double moved = motion_.rate_ml_per_min * drivers::to_seconds(until - motion_.start) / 60.0;
  moved = std::min(moved, motion_.volume_ml);
  return std::floor(moved / step_ml_ + 1e-9) * step_ml_;
}

bool VirtualBurette::moving() const {
  return motion_.kind != MotionKind::none && clock_.now() < motion_end(nullptr);
}

bool VirtualBurette::filling() const {
  return motion_.kind == MotionKind::fill && moving();
}

double VirtualBurette::true_delivered_ml() const {
  double total = true_total_ml_;
  if (motion_.kind == MotionKind::dose) {
    const double moved = moved_at(clock_.now());
    const double fraction = motion_.volume_ml > 0.0 ? moved / motion_.volume_ml : 0.0;
    total +=
        moved * (1.0 + spec_.systematic_error_percent / 100.0) + fraction * motion_.dose_error_ml;
  }
  return total;
}

double VirtualBurette::counter_ml() const {
  double c = counter_ml_;
  if (motion_.kind == MotionKind::dose)
    c += moved_at(clock_.now());
  return c;
}

void VirtualBurette::update() {
  if (motion_.kind == MotionKind::none)
    return;
  std::string why;
  const Duration end = motion_end(&why);
  if (clock_.now() < end)
    return;
  finish_motion(moved_at(end), why);
}

void VirtualBurette::finish_motion(double moved_ml, const std::string& why) {
  if (motion_.kind == MotionKind::dose) {
    const double fraction = motion_.volume_ml > 0.0 ? moved_ml / motion_.volume_ml : 0.0;
    counter_ml_ += moved_ml;
    true_total_ml_ += moved_ml * (1.0 + spec_.systematic_error_percent / 100.0) +
                      fraction * motion_.dose_error_ml;
    cylinder_content_ml_ -= moved_ml;
  } else if (motion_.kind == MotionKind::fill) {
    // A completed fill leaves the cylinder exactly full: the piston is at its
    // stop. (Adding the moved volume alone leaves it a rounding short of
    // full, and a host checking "full" would see the reservoir as empty.)
    const double before = cylinder_content_ml_;
    cylinder_content_ml_ =
        why == "completed" ? spec_.cylinder_ml : std::min(spec_.cylinder_ml, before + moved_ml);
    spec_.reservoir_ml -= cylinder_content_ml_ - before;
  }
  last_stop_ = why;
  if (why == "fault")
    faulted_ = true;
  motion_ = Motion{};
}

protocol::Message VirtualBurette::status_reply(std::uint32_t sequence) const {
  protocol::Message m = protocol::ok_reply(sequence);
  const char* state = "idle";
  double content = cylinder_content_ml_;
  if (motion_.kind == MotionKind::dose) {
    state = "dosing";
    content -= moved_at(clock_.now());
  } else if (motion_.kind == MotionKind::fill) {
    state = "filling";
    content += moved_at(clock_.now());
  }
  if (faulted_)
    state = "fault";
  m.add("state", state);
  m.add("cylinder_ml", content, 5);
  m.add("delivered_ml", counter_ml(), 5);
  m.add("reservoir_ml", spec_.reservoir_ml, 2);
  m.add("last_stop", last_stop_);
  m.add("fault", faulted_                       ? motor_fault_kind_name(spec_.motor_fault.kind)
                 : last_stop_ == "host_silence" ? "host_silent"
                                                : "none");
  if (spec_.ports > 0)
    m.add("port", std::to_string(port_));
  return m;
}

protocol::Message VirtualBurette::handle(const protocol::Message& request) {
  update();
  last_contact_ = clock_.now();
  const auto seq = request.sequence;
  const std::string& word = request.word;
  if (word == "identify") {
    protocol::Message m = protocol::ok_reply(seq);
    m.add("role", "burette");
    m.add("model", spec_.model);
    m.add("protocol", std::to_string(protocol::kRevision));
    m.add("cylinder_ml", spec_.cylinder_ml, 4);
    m.add("steps_per_cylinder", spec_.steps_per_cylinder, 0);
    m.add("max_rate_ml_per_min", spec_.max_rate_ml_per_min, 3);
    m.add("max_dose_ml", spec_.max_dose_ml, 4);
    m.add("max_fill_rate_ml_per_min", fill_rate_limit(), 3);
    if (spec_.ports > 0)
      m.add("ports", std::to_string(spec_.ports));
    m.add("serial_number", spec_.serial_number);
    m.add("features", spec_.ports > 0 ? "fill,valve,reset_counter,host_silence_limit,ping"
                                      : "fill,reset_counter,host_silence_limit,ping");
    return m;
  }
  if (word == "status")
    return status_reply(seq);
  if (word == "stop") {
    // Stops at once: the motion ends where it is now. Stopping also
    // acknowledges a motor fault.
    if (motion_.kind != MotionKind::none)
      finish_motion(moved_at(clock_.now()), "host");
    auto reply = status_reply(seq);
    faulted_ = false;
    return reply;
  }
  if (word == "valve") {
    if (spec_.ports <= 0)
      return protocol::error_reply(seq, "unknown_command", "this burette has no valve to turn");
    if (motion_.kind != MotionKind::none)
      return protocol::error_reply(seq, "busy", "cannot turn the valve while moving");
    auto port = request.number("port");
    if (!port || *port < 1 || *port > spec_.ports || std::floor(*port) != *port) {
      return protocol::error_reply(
          seq, "bad_field", "port must be a whole number from 1 to " + std::to_string(spec_.ports));
    }
    port_ = static_cast<int>(*port);
    return protocol::ok_reply(seq);
  }
  if (word == "reset_counter") {
    if (motion_.kind != MotionKind::none) {
      return protocol::error_reply(seq, "busy", "cannot reset the counter while moving");
    }
    counter_ml_ = 0.0;
    return protocol::ok_reply(seq);
  }
  if (word == "ping")
    return protocol::ok_reply(seq);
  if (word == "host_silence_limit") {
    auto ms = request.number("ms");
    if (!ms || *ms < 500.0 || *ms > 60000.0) {
      return protocol::error_reply(seq, "bad_field", "ms must be a number from 500 to 60000");
    }
    host_silence_limit_ = drivers::from_seconds(*ms / 1000.0);
    return protocol::ok_reply(seq);
  }
  if (word == "dose" || word == "fill") {
    if (motion_.kind != MotionKind::none) {
      return protocol::error_reply(seq, "busy", "the motor is still moving");
    }
    auto rate = request.number("rate_ml_per_min");
    if (!rate || *rate <= 0.0) {
      return protocol::error_reply(seq, "bad_field", "rate_ml_per_min must be a number > 0");
    }
    const double max_rate = word == "fill" ? fill_rate_limit() : spec_.max_rate_ml_per_min;
    if (*rate > max_rate * (1.0 + 1e-9)) {
      return protocol::error_reply(
          seq, "over_limit",
          "rate above the device maximum of " + protocol::format_number(max_rate, 3) + " mL/min");
    }
    Motion m;
    m.start = clock_.now();
    m.rate_ml_per_min = *rate;
    if (word == "dose") {
      auto volume = request.number("volume_ml");
      auto limit = request.number("limit_ms");
      if (!volume || *volume <= 0.0) {
        return protocol::error_reply(seq, "bad_field", "volume_ml must be a number > 0");
      }
      if (!limit || *limit <= 0.0) {
        return protocol::error_reply(seq, "bad_field", "limit_ms must be a number > 0");
      }
      if (*volume > spec_.max_dose_ml * (1.0 + 1e-9)) {
        return protocol::error_reply(seq, "over_limit",
                                     "a single dose may not exceed " +
                                         protocol::format_number(spec_.max_dose_ml, 4) + " mL");
      }
      if (*volume > cylinder_content_ml_ + 1e-9) {
        return protocol::error_reply(seq, "empty",
                                     "the cylinder holds only " +
                                         protocol::format_number(cylinder_content_ml_, 4) +
                                         " mL; fill first");
      }
      m.kind = MotionKind::dose;
      m.volume_ml = std::round(*volume / step_ml_) * step_ml_;
      m.time_limit = drivers::from_seconds(*limit / 1000.0);
      if (spec_.random_error_ml > 0.0) {
        std::normal_distribution<double> error(0.0, spec_.random_error_ml);
        m.dose_error_ml = error(random_);
      }
    } else {
      const double room = spec_.cylinder_ml - cylinder_content_ml_;
      if (room > spec_.reservoir_ml) {
        return protocol::error_reply(seq, "empty", "the titrant reservoir is empty");
      }
      m.kind = MotionKind::fill;
      m.volume_ml = room;
    }
    // A new motion clears a fault the host has not acknowledged yet.
    faulted_ = false;
    if (m.volume_ml <= 0.0)
      return protocol::ok_reply(seq);
    motion_ = m;
    return protocol::ok_reply(seq);
  }
  return protocol::error_reply(seq, "unknown_command", "no command '" + word + "'");
}

void VirtualBurette::set_motor_fault(MotorFault fault) {
  // Book what the motion did up to now under the old plan first.
  update();
  spec_.motor_fault = fault;
}

}  // namespace veq::simulator
