#include "drivers/burette_client.hpp"

#include <algorithm>
#include <cmath>

namespace veq::drivers {

namespace {
protocol::Message request(std::string word) {
  protocol::Message m;
  m.word = std::move(word);
  return m;
}

Result<BuretteStatus> parse_status(const protocol::Message& reply, const std::string& device) {
  BuretteStatus s;
  auto state = reply.text("state");
  if (!state)
    return make_error(ErrorKind::garbled, device + ": " + state.error().message);
  if (*state == "idle") {
    s.state = BuretteState::idle;
  } else if (*state == "dosing") {
    s.state = BuretteState::dosing;
  } else if (*state == "filling") {
    s.state = BuretteState::filling;
  } else if (*state == "fault") {
    s.state = BuretteState::fault;
  } else {
    return make_error(ErrorKind::garbled, device + ": unknown burette state '" + *state + "'");
  }
  auto content = reply.number("cylinder_ml");
  auto delivered = reply.number("delivered_ml");
  if (!content)
    return make_error(ErrorKind::garbled, device + ": " + content.error().message);
  if (!delivered)
    return make_error(ErrorKind::garbled, device + ": " + delivered.error().message);
  s.cylinder_content_ml = *content;
  s.delivered_ml = *delivered;
  if (reply.find("reservoir_ml")) {
    auto reservoir = reply.number("reservoir_ml");
    if (!reservoir)
      return make_error(ErrorKind::garbled, device + ": " + reservoir.error().message);
    s.reservoir_ml = *reservoir;
  }
  auto fault = reply.find("fault");
  s.fault = fault ? std::string(*fault) : "none";
  return s;
}
}  // namespace

const char* burette_state_name(BuretteState state) {
  switch (state) {
    case BuretteState::idle:
      return "idle";
    case BuretteState::dosing:
      return "dosing";
    case BuretteState::filling:
      return "filling";
    case BuretteState::fault:
      return "fault";
  }
  return "unknown";
}

BuretteClient::BuretteClient(DeviceLink& link, BuretteClientOptions options)
    : link_(link), options_(options) {}

Result<BuretteInfo> BuretteClient::identify() {
  auto reply = link_.call(request("identify"));
  if (!reply)
    return reply.error();
  auto role = reply->text("role");
  if (!role || *role != "burette") {
    return make_error(ErrorKind::invalid_input, link_.describe() + " is not a burette (role '" +
                                                    (role ? *role : std::string("missing")) + "')");
  }
  BuretteInfo info;
  auto model = reply->find("model");
  info.model = model ? std::string(*model) : "unknown";
  for (auto [name, target] : {std::pair{"cylinder_ml", &info.cylinder_ml},
                              std::pair{"steps_per_cylinder", &info.steps_per_cylinder},
                              std::pair{"max_rate_ml_per_min", &info.max_rate_ml_per_min},
                              std::pair{"max_dose_ml", &info.max_dose_ml}}) {
    auto v = reply->number(name);
    if (!v)
      return make_error(ErrorKind::garbled, link_.describe() + ": " + v.error().message);
    *target = *v;
  }
  info_ = info;
  return info;
}

Result<void> BuretteClient::arm_host_silence_stop() {
  auto m = request("host_silence_limit");
  m.add("ms", std::to_string(options_.host_silence_limit_ms));
  auto reply = link_.call(std::move(m));
  if (!reply)
    return reply.error();
  return {};
}

Result<void> BuretteClient::start_dose(double volume_ml, double rate_ml_per_min) {
  if (!(volume_ml > 0.0) || !std::isfinite(volume_ml) || !(rate_ml_per_min > 0.0)) {
    return make_error(ErrorKind::invalid_input,
                      link_.describe() + ": dose needs a volume > 0 mL " + "and a rate > 0 mL/min");
  }
  // The time limit the device enforces on its own: the planned motion time
  // plus the margin, so a vanished host cannot leave it dosing.
  const double limit_s = volume_ml / rate_ml_per_min * 60.0 + options_.motion_margin_s;
  auto m = request("dose");
  m.add("volume_ml", volume_ml, 5);
  m.add("rate_ml_per_min", rate_ml_per_min, 4);
  m.add("limit_ms", std::to_string(static_cast<long>(std::ceil(limit_s * 1000.0))));
  auto reply = link_.call(std::move(m));
  if (!reply)
    return reply.error();
  return {};
}

Result<void> BuretteClient::start_fill(double rate_ml_per_min) {
  auto m = request("fill");
  m.add("rate_ml_per_min", rate_ml_per_min, 4);
  auto reply = link_.call(std::move(m));
  if (!reply)
    return reply.error();
  return {};
}

Result<BuretteStatus> BuretteClient::status() {
  auto reply = link_.call(request("status"));
  if (!reply)
    return reply.error();
  return parse_status(*reply, link_.describe());
}

Result<BuretteStatus> BuretteClient::stop() {
  auto reply = link_.call(request("stop"));
  if (!reply)
    return reply.error();
  return parse_status(*reply, link_.describe());
}

Result<void> BuretteClient::reset_counter() {
  auto reply = link_.call(request("reset_counter"));
  if (!reply)
    return reply.error();
  return {};
}

Result<BuretteStatus> BuretteClient::wait_until_idle(double expected_s) {
  Clock& clock = link_.clock();
  const Duration give_up = clock.now() + from_seconds(expected_s + options_.motion_margin_s);
  const Duration poll = from_seconds(options_.poll_interval_s);
  while (true) {
    auto s = status();
    if (!s)
      return s.error();
    if (s->state == BuretteState::fault) {
      return make_error(ErrorKind::device_fault,
                        link_.describe() + " reports fault '" + s->fault + "' with " +
                            protocol::format_number(s->delivered_ml, 4) + " mL delivered");
    }
    if (s->state == BuretteState::idle)
      return s;
    if (clock.now() >= give_up) {
      auto stopped = stop();
      return make_error(ErrorKind::device_fault,
                        link_.describe() + " still moving " +
                            protocol::format_number(expected_s + options_.motion_margin_s, 1) +
                            " s after the motion began" +
                            (stopped ? "; stopped" : "; stop failed: " + stopped.error().message));
    }
    clock.sleep_for(std::min(poll, give_up - clock.now() + Duration(1)));
  }
}

Result<BuretteStatus> BuretteClient::dose(double volume_ml, double rate_ml_per_min) {
  if (auto started = start_dose(volume_ml, rate_ml_per_min); !started)
    return started.error();
  return wait_until_idle(volume_ml / rate_ml_per_min * 60.0);
}

Result<BuretteStatus> BuretteClient::fill(double rate_ml_per_min) {
  if (auto started = start_fill(rate_ml_per_min); !started)
    return started.error();
  const double cylinder = info_.cylinder_ml > 0.0 ? info_.cylinder_ml : 50.0;
  return wait_until_idle(cylinder / rate_ml_per_min * 60.0);
}

}  // namespace veq::drivers
