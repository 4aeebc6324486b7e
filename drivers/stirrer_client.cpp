#include "drivers/stirrer_client.hpp"

#include <cmath>

#include "drivers/reply_fields.hpp"

namespace veq::drivers {

namespace rf = reply_fields;

namespace stirrer_messages {

protocol::Message identify() {
  return rf::request("identify");
}
protocol::Message speed(double rpm) {
  auto m = rf::request("speed");
  m.add("rpm", rpm, 0);
  return m;
}
protocol::Message status() {
  return rf::request("status");
}

Result<StirrerInfo> parse_identity(const protocol::Message& reply, const std::string& device) {
  if (auto ok = rf::expect_role(reply, "stirrer", device, "a stirrer"); !ok)
    return ok.error();
  StirrerInfo info;
  info.model = rf::text_or(reply, "model", "unknown");
  info.serial_number = rf::text_or(reply, "serial_number", "");
  auto max = rf::number(reply, "max_speed_rpm", device);
  if (!max)
    return max.error();
  auto min = rf::optional_number(reply, "min_speed_rpm", device);
  if (!min)
    return min.error();
  info.max_speed_rpm = *max;
  info.min_speed_rpm = min->value_or(0.0);
  if (!(info.max_speed_rpm > 0.0) || info.min_speed_rpm < 0.0 ||
      info.min_speed_rpm > info.max_speed_rpm) {
    return make_error(ErrorKind::garbled,
                      device + ": speed range " + protocol::format_number(info.min_speed_rpm, 0) +
                          " to " + protocol::format_number(info.max_speed_rpm, 0) +
                          " rpm is not a range");
  }
  info.features = parse_features(reply, {"status", "ping"});
  return info;
}

Result<StirrerStatus> parse_status(const protocol::Message& reply, const std::string& device) {
  StirrerStatus s;
  auto speed = rf::number(reply, "speed_rpm", device);
  if (!speed)
    return speed.error();
  s.speed_rpm = *speed;
  auto target = rf::optional_number(reply, "target_rpm", device);
  if (!target)
    return target.error();
  s.target_rpm = target->value_or(-1.0);
  s.fault = rf::text_or(reply, "fault", "none");
  return s;
}

}  // namespace stirrer_messages

StirrerClient::StirrerClient(DeviceChannel& link) : link_(link) {}

Result<StirrerInfo> StirrerClient::identify() {
  auto reply = link_.call(stirrer_messages::identify());
  if (!reply)
    return reply.error();
  auto info = stirrer_messages::parse_identity(*reply, describe());
  if (!info)
    return info.error();
  info_ = *info;
  identified_ = true;
  return info;
}

Result<void> StirrerClient::set_speed(double rpm) {
  if (!std::isfinite(rpm) || rpm < 0.0)
    return make_error(ErrorKind::invalid_input, describe() + ": a speed must be 0 rpm or more");
  if (identified_ && rpm > 0.0 &&
      (rpm < info_.min_speed_rpm - 1e-9 || rpm > info_.max_speed_rpm + 1e-9)) {
    return make_error(ErrorKind::invalid_input,
                      describe() + ": " + protocol::format_number(rpm, 0) +
                          " rpm is outside the stirrer's range of " +
                          protocol::format_number(info_.min_speed_rpm, 0) + " to " +
                          protocol::format_number(info_.max_speed_rpm, 0) + " rpm");
  }
  auto reply = link_.call(stirrer_messages::speed(rpm));
  if (!reply)
    return reply.error();
  return {};
}

Result<StirrerStatus> StirrerClient::status() {
  auto reply = link_.call(stirrer_messages::status());
  if (!reply)
    return reply.error();
  return stirrer_messages::parse_status(*reply, describe());
}

}  // namespace veq::drivers
