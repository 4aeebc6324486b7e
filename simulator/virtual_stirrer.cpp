#include "simulator/virtual_stirrer.hpp"

#include <algorithm>
#include <cmath>

namespace veq::simulator {

namespace protocol = drivers::protocol;

VirtualStirrer::VirtualStirrer(const StirrerSpec& spec, drivers::Clock& clock, std::uint64_t seed)
    : VirtualDevice(clock, seed), spec_(spec) {}

double VirtualStirrer::ramped(drivers::Duration t) const {
  const double dt = drivers::to_seconds(t - changed_);
  const double gap = target_rpm_ - from_rpm_;
  const double step = std::min(std::fabs(gap), spec_.ramp_rpm_per_s * std::max(0.0, dt));
  return from_rpm_ + std::copysign(step, gap);
}

bool VirtualStirrer::decoupled() const {
  // The bar decouples once the speed passes the limit on its way up.
  return spec_.decouple_above_rpm > 0.0 && target_rpm_ > spec_.decouple_above_rpm &&
         ramped(clock_.now()) >= spec_.decouple_above_rpm;
}

double VirtualStirrer::speed_rpm() const {
  return decoupled() ? 0.0 : ramped(clock_.now());
}

protocol::Message VirtualStirrer::handle(const protocol::Message& request) {
  const auto seq = request.sequence;
  const std::string& word = request.word;
  if (word == "identify") {
    protocol::Message m = protocol::ok_reply(seq);
    m.add("role", "stirrer");
    m.add("model", spec_.model);
    m.add("protocol", std::to_string(protocol::kRevision));
    m.add("max_speed_rpm", spec_.max_speed_rpm, 0);
    m.add("min_speed_rpm", spec_.min_speed_rpm, 0);
    m.add("serial_number", spec_.serial_number);
    m.add("features", "status,ping");
    return m;
  }
  if (word == "speed") {
    auto rpm = request.number("rpm");
    if (!rpm || *rpm < 0.0)
      return protocol::error_reply(seq, "bad_field", "rpm must be a number >= 0");
    if (*rpm > 0.0 && (*rpm < spec_.min_speed_rpm - 1e-9 || *rpm > spec_.max_speed_rpm + 1e-9)) {
      return protocol::error_reply(seq, "over_limit",
                                   "rpm must be 0 or from " +
                                       protocol::format_number(spec_.min_speed_rpm, 0) + " to " +
                                       protocol::format_number(spec_.max_speed_rpm, 0));
    }
    from_rpm_ = speed_rpm();
    changed_ = clock_.now();
    target_rpm_ = *rpm;
    return protocol::ok_reply(seq);
  }
  if (word == "status") {
    protocol::Message m = protocol::ok_reply(seq);
    m.add("speed_rpm", speed_rpm(), 0);
    m.add("target_rpm", target_rpm_, 0);
    m.add("fault", decoupled() ? "stalled" : "none");
    return m;
  }
  if (word == "ping")
    return protocol::ok_reply(seq);
  return protocol::error_reply(seq, "unknown_command", "no command '" + word + "'");
}

}  // namespace veq::simulator
