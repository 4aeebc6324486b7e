#include "drivers/auxiliary_doser_client.hpp"

#include <algorithm>
#include <cmath>

#include "drivers/reply_fields.hpp"

namespace veq::drivers {

namespace rf = reply_fields;

const char* reagent_name(Reagent reagent) {
  switch (reagent) {
    case Reagent::buffer:
      return "buffer";
    case Reagent::masking_agent:
      return "masking_agent";
    case Reagent::indicator:
      return "indicator";
    case Reagent::water:
      return "water";
    case Reagent::acid:
      return "acid";
    case Reagent::base:
      return "base";
  }
  return "unknown";
}

std::optional<Reagent> reagent_from_name(std::string_view name) {
  for (Reagent r : {Reagent::buffer, Reagent::masking_agent, Reagent::indicator, Reagent::water,
                    Reagent::acid, Reagent::base}) {
    if (name == reagent_name(r))
      return r;
  }
  return std::nullopt;
}

bool DoserInfo::has(Reagent r) const {
  return std::find(reagents.begin(), reagents.end(), r) != reagents.end();
}

namespace doser_messages {

protocol::Message identify() {
  return rf::request("identify");
}

protocol::Message dose(Reagent reagent, double volume_ml, double rate_ml_per_min, long limit_ms) {
  auto m = rf::request("dose");
  m.add("reagent", reagent_name(reagent));
  m.add("volume_ml", volume_ml, 4);
  m.add("rate_ml_per_min", rate_ml_per_min, 3);
  m.add("limit_ms", std::to_string(limit_ms));
  return m;
}

protocol::Message status() {
  return rf::request("status");
}
protocol::Message stop() {
  return rf::request("stop");
}
protocol::Message host_silence_limit(int ms) {
  auto m = rf::request("host_silence_limit");
  m.add("ms", std::to_string(ms));
  return m;
}

Result<DoserInfo> parse_identity(const protocol::Message& reply, const std::string& device) {
  if (auto ok = rf::expect_role(reply, "auxiliary_doser", device, "an auxiliary doser"); !ok)
    return ok.error();
  DoserInfo info;
  info.model = rf::text_or(reply, "model", "unknown");
  info.serial_number = rf::text_or(reply, "serial_number", "");
  auto list = rf::text(reply, "reagents", device);
  if (!list)
    return list.error();
  std::size_t start = 0;
  while (start <= list->size()) {
    const auto comma = list->find(',', start);
    const std::string word = list->substr(start, comma - start);
    auto r = reagent_from_name(word);
    if (!r) {
      return make_error(ErrorKind::garbled, device + ": unknown reagent '" + word +
                                                "' (known: buffer, masking_agent, indicator, "
                                                "water, acid, base)");
    }
    info.reagents.push_back(*r);
    if (comma == std::string::npos)
      break;
    start = comma + 1;
  }
  auto max_dose = rf::number(reply, "max_dose_ml", device);
  if (!max_dose)
    return max_dose.error();
  auto max_rate = rf::number(reply, "max_rate_ml_per_min", device);
  if (!max_rate)
    return max_rate.error();
  if (!(*max_dose > 0.0) || !(*max_rate > 0.0)) {
    return make_error(ErrorKind::garbled,
                      device + ": max_dose_ml and max_rate_ml_per_min must be above 0");
  }
  info.max_dose_ml = *max_dose;
  info.max_rate_ml_per_min = *max_rate;
  info.features = parse_features(reply, {"host_silence_limit", "ping"});
  return info;
}

Result<DoserStatus> parse_status(const protocol::Message& reply, const std::string& device) {
  DoserStatus s;
  auto state = rf::text(reply, "state", device);
  if (!state)
    return state.error();
  if (*state == "idle") {
    s.state = DoserState::idle;
  } else if (*state == "dosing") {
    s.state = DoserState::dosing;
  } else if (*state == "fault") {
    s.state = DoserState::fault;
  } else {
    return make_error(ErrorKind::garbled, device + ": unknown doser state '" + *state + "'");
  }
  if (auto name = reply.find("reagent"); name && *name != "none") {
    s.reagent = reagent_from_name(*name);
    if (!s.reagent)
      return make_error(ErrorKind::garbled,
                        device + ": unknown reagent '" + std::string(*name) + "'");
  }
  auto dosed = rf::number(reply, "dosed_ml", device);
  if (!dosed)
    return dosed.error();
  s.dosed_ml = *dosed;
  auto reservoir = rf::optional_number(reply, "reservoir_ml", device);
  if (!reservoir)
    return reservoir.error();
  s.reservoir_ml = reservoir->value_or(-1.0);
  s.fault = rf::text_or(reply, "fault", "none");
  s.last_stop = rf::text_or(reply, "last_stop", "");
  return s;
}

}  // namespace doser_messages

AuxiliaryDoserClient::AuxiliaryDoserClient(DeviceChannel& link, DoserClientOptions options)
    : link_(link), options_(options), guard_(link) {}

Result<DoserInfo> AuxiliaryDoserClient::identify() {
  auto reply = link_.call(doser_messages::identify());
  if (!reply)
    return reply.error();
  auto info = doser_messages::parse_identity(*reply, describe());
  if (!info)
    return info.error();
  info_ = *info;
  identified_ = true;
  return info;
}

Result<void> AuxiliaryDoserClient::arm_host_silence_stop() {
  auto reply = link_.call(doser_messages::host_silence_limit(options_.host_silence_limit_ms));
  if (!reply)
    return reply.error();
  return {};
}

Result<void> AuxiliaryDoserClient::start_dose(Reagent reagent, double volume_ml,
                                              double rate_ml_per_min) {
  if (!(volume_ml > 0.0) || !std::isfinite(volume_ml) || !(rate_ml_per_min > 0.0) ||
      !std::isfinite(rate_ml_per_min)) {
    return make_error(ErrorKind::invalid_input,
                      describe() + ": a dose needs a volume > 0 mL and a rate > 0 mL/min");
  }
  if (auto ok = guard_.check(); !ok)
    return ok;
  if (identified_) {
    if (!info_.has(reagent)) {
      return make_error(ErrorKind::invalid_input,
                        describe() + " has no " + reagent_name(reagent) + " pump");
    }
    if (volume_ml > info_.max_dose_ml * (1.0 + 1e-9)) {
      return make_error(ErrorKind::invalid_input,
                        describe() + ": a dose of " + protocol::format_number(volume_ml, 3) +
                            " mL exceeds the doser's largest single dose of " +
                            protocol::format_number(info_.max_dose_ml, 3) +
                            " mL (add() splits larger volumes)");
    }
    if (rate_ml_per_min > info_.max_rate_ml_per_min * (1.0 + 1e-9)) {
      return make_error(ErrorKind::invalid_input,
                        describe() + ": a rate of " + protocol::format_number(rate_ml_per_min, 3) +
                            " mL/min exceeds the doser's maximum of " +
                            protocol::format_number(info_.max_rate_ml_per_min, 3) + " mL/min");
    }
  }
  const double limit_s = volume_ml / rate_ml_per_min * 60.0 + options_.motion_margin_s;
  auto reply = link_.call(doser_messages::dose(reagent, volume_ml, rate_ml_per_min,
                                               static_cast<long>(std::ceil(limit_s * 1000.0))));
  if (!reply) {
    if (reply.error().kind == ErrorKind::device_refused)
      return reply.error();
    return guard_.halt(reply.error());
  }
  return {};
}

Result<DoserStatus> AuxiliaryDoserClient::status() {
  auto reply = link_.call(doser_messages::status());
  if (!reply)
    return reply.error();
  return doser_messages::parse_status(*reply, describe());
}

Result<DoserStatus> AuxiliaryDoserClient::stop() {
  auto reply = link_.call(doser_messages::stop());
  if (!reply)
    return reply.error();
  return doser_messages::parse_status(*reply, describe());
}

Result<DoserStatus> AuxiliaryDoserClient::wait_until_idle(double expected_s) {
  Clock& clock = link_.clock();
  const Duration give_up = clock.now() + from_seconds(expected_s + options_.motion_margin_s);
  const Duration poll = from_seconds(options_.poll_interval_s);
  while (true) {
    auto s = status();
    if (!s)
      return guard_.halt(s.error());
    if (s->state == DoserState::fault) {
      return guard_.halt(make_error(ErrorKind::device_fault,
                                    describe() + " reports fault '" + s->fault + "' with " +
                                        protocol::format_number(s->dosed_ml, 3) + " mL dosed"));
    }
    if (s->state == DoserState::idle)
      return s;
    if (clock.now() >= give_up) {
      return guard_.halt(
          make_error(ErrorKind::device_fault,
                     describe() + " still dosing " +
                         protocol::format_number(expected_s + options_.motion_margin_s, 1) +
                         " s after the dose began"));
    }
    clock.sleep_for(std::min(poll, give_up - clock.now() + Duration(1)));
  }
}

Result<DoserStatus> AuxiliaryDoserClient::dose(Reagent reagent, double volume_ml,
                                               double rate_ml_per_min) {
  if (auto started = start_dose(reagent, volume_ml, rate_ml_per_min); !started)
    return started.error();
  return wait_until_idle(volume_ml / rate_ml_per_min * 60.0);
}

Result<double> AuxiliaryDoserClient::add(Reagent reagent, double volume_ml,
                                         double rate_ml_per_min) {
  if (!identified_) {
    if (auto info = identify(); !info)
      return info.error();
  }
  if (!(volume_ml > 0.0) || !std::isfinite(volume_ml)) {
    return make_error(ErrorKind::invalid_input, describe() + ": volume must be above 0 mL");
  }
  const int pieces = static_cast<int>(std::ceil(volume_ml / info_.max_dose_ml - 1e-9));
  const double piece_ml = volume_ml / pieces;
  double dosed = 0.0;
  for (int i = 0; i < pieces; ++i) {
    auto done = dose(reagent, piece_ml, rate_ml_per_min);
    if (!done)
      return done.error();
    if (done->last_stop != "completed" && !done->last_stop.empty()) {
      return guard_.halt(make_error(
          ErrorKind::device_fault,
          describe() + ": dose " + std::to_string(i + 1) + " of " + std::to_string(pieces) +
              " ended early ('" + done->last_stop + "') after " +
              protocol::format_number(dosed + done->dosed_ml, 3) + " mL in total"));
    }
    dosed += done->dosed_ml;
  }
  return dosed;
}

}  // namespace veq::drivers
