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

Error garbled(const std::string& device, const Error& e) {
  return make_error(ErrorKind::garbled, device + ": " + e.message);
}

/// Optional operations of a revision-1 burette, which predates `features`.
const std::vector<std::string> kRevisionOneFeatures = {"fill", "reset_counter",
                                                       "host_silence_limit", "ping"};

}  // namespace

namespace burette_messages {

protocol::Message identify() {
  return request("identify");
}

protocol::Message dose(double volume_ml, double rate_ml_per_min, long limit_ms) {
  auto m = request("dose");
  m.add("volume_ml", volume_ml, 5);
  m.add("rate_ml_per_min", rate_ml_per_min, 4);
  m.add("limit_ms", std::to_string(limit_ms));
  return m;
}

protocol::Message fill(double rate_ml_per_min) {
  auto m = request("fill");
  m.add("rate_ml_per_min", rate_ml_per_min, 4);
  return m;
}

protocol::Message status() {
  return request("status");
}
protocol::Message stop() {
  return request("stop");
}

protocol::Message valve(int port) {
  auto m = request("valve");
  m.add("port", std::to_string(port));
  return m;
}

protocol::Message reset_counter() {
  return request("reset_counter");
}

protocol::Message host_silence_limit(int ms) {
  auto m = request("host_silence_limit");
  m.add("ms", std::to_string(ms));
  return m;
}

Result<BuretteInfo> parse_identity(const protocol::Message& reply, const std::string& device) {
  auto role = reply.text("role");
  if (!role || *role != "burette") {
    return make_error(ErrorKind::invalid_input, device + " is not a burette (role '" +
                                                    (role ? *role : std::string("missing")) + "')");
  }
  BuretteInfo info;
  auto model = reply.find("model");
  info.model = model ? std::string(*model) : "unknown";
  for (auto [name, target] : {std::pair{"cylinder_ml", &info.cylinder_ml},
                              std::pair{"steps_per_cylinder", &info.steps_per_cylinder},
                              std::pair{"max_rate_ml_per_min", &info.max_rate_ml_per_min},
                              std::pair{"max_dose_ml", &info.max_dose_ml}}) {
    auto v = reply.number(name);
    if (!v)
      return garbled(device, v.error());
    if (!(*v > 0.0)) {
      return make_error(ErrorKind::garbled,
                        device + ": identify field '" + name + "' must be above 0");
    }
    *target = *v;
  }
  info.max_fill_rate_ml_per_min = info.max_rate_ml_per_min;
  if (reply.find("max_fill_rate_ml_per_min")) {
    auto v = reply.number("max_fill_rate_ml_per_min");
    if (!v)
      return garbled(device, v.error());
    info.max_fill_rate_ml_per_min = *v;
  }
  if (reply.find("ports")) {
    auto v = reply.number("ports");
    if (!v || *v < 0.0 || *v > 64.0 || std::floor(*v) != *v)
      return make_error(ErrorKind::garbled, device + ": 'ports' is not a whole number 0..64");
    info.ports = static_cast<int>(*v);
  }
  if (auto serial = reply.find("serial_number"))
    info.serial_number = std::string(*serial);
  info.features = parse_features(reply, kRevisionOneFeatures);
  return info;
}

Result<BuretteStatus> parse_status(const protocol::Message& reply, const std::string& device) {
  BuretteStatus s;
  auto state = reply.text("state");
  if (!state)
    return garbled(device, state.error());
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
  if (!content)
    return garbled(device, content.error());
  auto delivered = reply.number("delivered_ml");
  if (!delivered)
    return garbled(device, delivered.error());
  s.cylinder_content_ml = *content;
  s.delivered_ml = *delivered;
  if (reply.find("reservoir_ml")) {
    auto reservoir = reply.number("reservoir_ml");
    if (!reservoir)
      return garbled(device, reservoir.error());
    s.reservoir_ml = *reservoir;
  }
  if (reply.find("port")) {
    auto port = reply.number("port");
    if (!port)
      return garbled(device, port.error());
    s.port = static_cast<int>(*port);
  }
  auto fault = reply.find("fault");
  s.fault = fault ? std::string(*fault) : "none";
  auto last = reply.find("last_stop");
  s.last_stop = last ? std::string(*last) : std::string();
  return s;
}

}  // namespace burette_messages

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

BuretteClient::BuretteClient(DeviceChannel& link, BuretteClientOptions options)
    : link_(link), options_(options), guard_(link) {}

Result<BuretteInfo> BuretteClient::identify() {
  auto reply = link_.call(burette_messages::identify());
  if (!reply)
    return reply.error();
  auto info = burette_messages::parse_identity(*reply, link_.describe());
  if (!info)
    return info.error();
  info_ = *info;
  return info;
}

Result<void> BuretteClient::arm_host_silence_stop() {
  auto reply = link_.call(burette_messages::host_silence_limit(options_.host_silence_limit_ms));
  if (!reply)
    return reply.error();
  return {};
}

Result<void> BuretteClient::start_dose(double volume_ml, double rate_ml_per_min) {
  if (!(volume_ml > 0.0) || !std::isfinite(volume_ml) || !(rate_ml_per_min > 0.0) ||
      !std::isfinite(rate_ml_per_min)) {
    return make_error(ErrorKind::invalid_input,
                      link_.describe() + ": dose needs a volume > 0 mL " + "and a rate > 0 mL/min");
  }
  if (auto ok = guard_.check(); !ok)
    return ok;
  // Limits are checked here too once known, so that a request the device
  // would refuse never goes out (and a device that would not refuse it is
  // still kept within what it claims).
  if (info_.max_dose_ml > 0.0 && volume_ml > info_.max_dose_ml * (1.0 + 1e-9)) {
    return make_error(ErrorKind::invalid_input,
                      link_.describe() + ": a dose of " + protocol::format_number(volume_ml, 4) +
                          " mL exceeds the burette's largest single dose of " +
                          protocol::format_number(info_.max_dose_ml, 4) + " mL");
  }
  if (info_.max_rate_ml_per_min > 0.0 &&
      rate_ml_per_min > info_.max_rate_ml_per_min * (1.0 + 1e-9)) {
    return make_error(ErrorKind::invalid_input,
                      link_.describe() + ": a rate of " +
                          protocol::format_number(rate_ml_per_min, 3) +
                          " mL/min exceeds the burette's maximum of " +
                          protocol::format_number(info_.max_rate_ml_per_min, 3) + " mL/min");
  }
  // The time limit the device enforces on its own: the planned motion time
  // plus the margin, so a vanished host cannot leave it dosing.
  const double limit_s = volume_ml / rate_ml_per_min * 60.0 + options_.motion_margin_s;
  auto reply = link_.call(burette_messages::dose(volume_ml, rate_ml_per_min,
                                                 static_cast<long>(std::ceil(limit_s * 1000.0))));
  if (!reply) {
    // Refused: nothing moves. Anything else: the dose may have started.
    if (reply.error().kind == ErrorKind::device_refused)
      return reply.error();
    return guard_.halt(reply.error());
  }
  return {};
}

Result<void> BuretteClient::start_fill(double rate_ml_per_min) {
  if (!(rate_ml_per_min > 0.0) || !std::isfinite(rate_ml_per_min)) {
    return make_error(ErrorKind::invalid_input,
                      link_.describe() + ": fill needs a rate > 0 mL/min");
  }
  if (auto ok = guard_.check(); !ok)
    return ok;
  if (info_.max_fill_rate_ml_per_min > 0.0 &&
      rate_ml_per_min > info_.max_fill_rate_ml_per_min * (1.0 + 1e-9)) {
    return make_error(ErrorKind::invalid_input,
                      link_.describe() + ": a filling rate of " +
                          protocol::format_number(rate_ml_per_min, 3) +
                          " mL/min exceeds the burette's maximum of " +
                          protocol::format_number(info_.max_fill_rate_ml_per_min, 3) + " mL/min");
  }
  auto reply = link_.call(burette_messages::fill(rate_ml_per_min));
  if (!reply) {
    if (reply.error().kind == ErrorKind::device_refused)
      return reply.error();
    return guard_.halt(reply.error());
  }
  return {};
}

Result<BuretteStatus> BuretteClient::status() {
  auto reply = link_.call(burette_messages::status());
  if (!reply)
    return reply.error();
  return burette_messages::parse_status(*reply, link_.describe());
}

Result<BuretteStatus> BuretteClient::stop() {
  auto reply = link_.call(burette_messages::stop());
  if (!reply)
    return reply.error();
  return burette_messages::parse_status(*reply, link_.describe());
}

Result<void> BuretteClient::reset_counter() {
  auto reply = link_.call(burette_messages::reset_counter());
  if (!reply)
    return reply.error();
  return {};
}

Result<void> BuretteClient::select_port(int port) {
  if (info_.ports > 0 && (port < 1 || port > info_.ports)) {
    return make_error(ErrorKind::invalid_input, link_.describe() + ": port " +
                                                    std::to_string(port) +
                                                    " does not exist (the valve has ports 1 to " +
                                                    std::to_string(info_.ports) + ")");
  }
  auto reply = link_.call(burette_messages::valve(port));
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
      return guard_.halt(s.error());
    if (s->state == BuretteState::fault) {
      return guard_.halt(make_error(ErrorKind::device_fault,
                                    link_.describe() + " reports fault '" + s->fault + "' with " +
                                        protocol::format_number(s->delivered_ml, 4) +
                                        " mL delivered"));
    }
    if (s->state == BuretteState::idle)
      return s;
    if (clock.now() >= give_up) {
      return guard_.halt(
          make_error(ErrorKind::device_fault,
                     link_.describe() + " still moving " +
                         protocol::format_number(expected_s + options_.motion_margin_s, 1) +
                         " s after the motion began"));
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
