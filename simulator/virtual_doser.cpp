#include "simulator/virtual_doser.hpp"

#include <algorithm>
#include <cmath>

namespace veq::simulator {

namespace protocol = drivers::protocol;
using drivers::Duration;
using drivers::Reagent;

namespace {
int index_of(Reagent r) {
  return static_cast<int>(r) - 1;
}
Reagent reagent_at(int i) {
  return static_cast<Reagent>(i + 1);
}
}  // namespace

VirtualAuxiliaryDoser::VirtualAuxiliaryDoser(const AuxiliaryDoserSpec& spec, drivers::Clock& clock,
                                             std::uint64_t seed)
    : VirtualDevice(clock, seed),
      spec_(spec),
      bottles_{spec.buffer, spec.masking_agent, spec.indicator, spec.water, spec.acid, spec.base},
      host_silence_limit_(drivers::from_seconds(kDefaultHostSilenceS)) {}

Duration VirtualAuxiliaryDoser::motion_end(std::string* why) const {
  Duration end =
      motion_.start + drivers::from_seconds(motion_.volume_ml / motion_.rate_ml_per_min * 60.0);
  std::string reason = "completed";
  if (motion_.time_limit > Duration::zero() && motion_.start + motion_.time_limit < end) {
    end = motion_.start + motion_.time_limit;
    reason = "time_limit";
  }
  if (host_silence_limit_ > Duration::zero() && last_contact_ + host_silence_limit_ < end) {
    end = std::max(motion_.start, last_contact_ + host_silence_limit_);
    reason = "host_silence";
  }
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

double VirtualAuxiliaryDoser::moved_at(Duration t) const {
  if (motion_.reagent < 0)
    return 0.0;
  const Duration until = std::min(t, motion_end(nullptr));
  if (until <= motion_.start)
    return 0.0;
  return std::min(motion_.volume_ml,
                  motion_.rate_ml_per_min * drivers::to_seconds(until - motion_.start) / 60.0);
}

bool VirtualAuxiliaryDoser::moving() const {
  return motion_.reagent >= 0 && clock_.now() < motion_end(nullptr);
}

double VirtualAuxiliaryDoser::true_added_ml(Reagent reagent) const {
  const int i = index_of(reagent);
  double total = true_added_[static_cast<std::size_t>(i)];
  if (motion_.reagent == i)
    total += moved_at(clock_.now()) * (1.0 + spec_.systematic_error_percent / 100.0);
  return total;
}

double VirtualAuxiliaryDoser::true_added_ml() const {
  double total = 0.0;
  for (int i = 0; i < static_cast<int>(bottles_.size()); ++i)
    total += true_added_ml(reagent_at(i));
  return total;
}

double VirtualAuxiliaryDoser::reservoir_ml(Reagent reagent) const {
  const int i = index_of(reagent);
  double left = bottles_[static_cast<std::size_t>(i)].reservoir_ml;
  if (motion_.reagent == i)
    left -= moved_at(clock_.now());
  return left;
}

void VirtualAuxiliaryDoser::update() {
  if (motion_.reagent < 0)
    return;
  std::string why;
  const Duration end = motion_end(&why);
  if (clock_.now() < end)
    return;
  finish(moved_at(end), why);
}

void VirtualAuxiliaryDoser::finish(double moved_ml, const std::string& why) {
  const auto i = static_cast<std::size_t>(motion_.reagent);
  true_added_[i] += moved_ml * (1.0 + spec_.systematic_error_percent / 100.0);
  bottles_[i].reservoir_ml -= moved_ml;
  last_reagent_ = motion_.reagent;
  last_dosed_ml_ = moved_ml;
  last_stop_ = why;
  if (why == "fault")
    faulted_ = true;
  motion_ = Motion{};
}

protocol::Message VirtualAuxiliaryDoser::status_reply(std::uint32_t sequence) const {
  protocol::Message m = protocol::ok_reply(sequence);
  const bool dosing = motion_.reagent >= 0;
  const int reagent = dosing ? motion_.reagent : last_reagent_;
  m.add("state", faulted_ ? "fault" : dosing ? "dosing" : "idle");
  m.add("reagent", reagent < 0 ? "none" : drivers::reagent_name(reagent_at(reagent)));
  m.add("dosed_ml", dosing ? moved_at(clock_.now()) : last_dosed_ml_, 4);
  if (reagent >= 0)
    m.add("reservoir_ml", reservoir_ml(reagent_at(reagent)), 2);
  m.add("last_stop", last_stop_);
  m.add("fault", faulted_                       ? motor_fault_kind_name(spec_.motor_fault.kind)
                 : last_stop_ == "host_silence" ? "host_silent"
                                                : "none");
  return m;
}

protocol::Message VirtualAuxiliaryDoser::handle(const protocol::Message& request) {
  update();
  last_contact_ = clock_.now();
  const auto seq = request.sequence;
  const std::string& word = request.word;
  if (word == "identify") {
    protocol::Message m = protocol::ok_reply(seq);
    m.add("role", "auxiliary_doser");
    m.add("model", spec_.model);
    m.add("protocol", std::to_string(protocol::kRevision));
    std::string reagents;
    for (int i = 0; i < static_cast<int>(bottles_.size()); ++i) {
      if (!bottles_[static_cast<std::size_t>(i)].present)
        continue;
      // Appended piece by piece: g++ 12 at -O3 warns (-Wrestrict, a false
      // positive) on a temporary built with operator+ here.
      if (!reagents.empty())
        reagents += ',';
      reagents += drivers::reagent_name(reagent_at(i));
    }
    m.add("reagents", reagents);
    m.add("max_dose_ml", spec_.max_dose_ml, 3);
    m.add("max_rate_ml_per_min", spec_.max_rate_ml_per_min, 3);
    m.add("serial_number", spec_.serial_number);
    m.add("features", "host_silence_limit,ping");
    return m;
  }
  if (word == "status")
    return status_reply(seq);
  if (word == "stop") {
    if (motion_.reagent >= 0)
      finish(moved_at(clock_.now()), "host");
    auto reply = status_reply(seq);
    faulted_ = false;
    return reply;
  }
  if (word == "ping")
    return protocol::ok_reply(seq);
  if (word == "host_silence_limit") {
    auto ms = request.number("ms");
    if (!ms || *ms < 500.0 || *ms > 60000.0)
      return protocol::error_reply(seq, "bad_field", "ms must be a number from 500 to 60000");
    host_silence_limit_ = drivers::from_seconds(*ms / 1000.0);
    return protocol::ok_reply(seq);
  }
  if (word == "dose") {
    if (motion_.reagent >= 0)
      return protocol::error_reply(seq, "busy", "a pump is still running");
    auto name = request.find("reagent");
    const auto reagent = name ? drivers::reagent_from_name(*name) : std::nullopt;
    if (!reagent)
      return protocol::error_reply(seq, "bad_field",
                                   "reagent must be buffer, masking_agent, "
                                   "indicator, water, acid or base");
    const auto i = static_cast<std::size_t>(index_of(*reagent));
    if (!bottles_[i].present) {
      return protocol::error_reply(seq, "bad_field",
                                   std::string("no pump for ") + drivers::reagent_name(*reagent));
    }
    auto volume = request.number("volume_ml");
    auto rate = request.number("rate_ml_per_min");
    auto limit = request.number("limit_ms");
    if (!volume || *volume <= 0.0)
      return protocol::error_reply(seq, "bad_field", "volume_ml must be a number > 0");
    if (!rate || *rate <= 0.0)
      return protocol::error_reply(seq, "bad_field", "rate_ml_per_min must be a number > 0");
    if (!limit || *limit <= 0.0)
      return protocol::error_reply(seq, "bad_field", "limit_ms must be a number > 0");
    if (*volume > spec_.max_dose_ml * (1.0 + 1e-9)) {
      return protocol::error_reply(
          seq, "over_limit",
          "a single dose may not exceed " + protocol::format_number(spec_.max_dose_ml, 3) + " mL");
    }
    if (*rate > spec_.max_rate_ml_per_min * (1.0 + 1e-9)) {
      return protocol::error_reply(seq, "over_limit",
                                   "rate above the device maximum of " +
                                       protocol::format_number(spec_.max_rate_ml_per_min, 3) +
                                       " mL/min");
    }
    if (*volume > bottles_[i].reservoir_ml + 1e-9) {
      return protocol::error_reply(
          seq, "empty",
          std::string("the ") + drivers::reagent_name(*reagent) + " bottle holds only " +
              protocol::format_number(bottles_[i].reservoir_ml, 2) + " mL");
    }
    faulted_ = false;
    motion_.reagent = static_cast<int>(i);
    motion_.start = clock_.now();
    motion_.volume_ml = *volume;
    motion_.rate_ml_per_min = *rate;
    motion_.time_limit = drivers::from_seconds(*limit / 1000.0);
    update();  // a motor fault already on ends it at once
    return protocol::ok_reply(seq);
  }
  return protocol::error_reply(seq, "unknown_command", "no command '" + word + "'");
}

void VirtualAuxiliaryDoser::set_motor_fault(MotorFault fault) {
  // Book what the motion did up to now under the old plan first.
  update();
  spec_.motor_fault = fault;
}

}  // namespace veq::simulator
