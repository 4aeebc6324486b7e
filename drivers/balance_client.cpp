#include "drivers/balance_client.hpp"

#include "drivers/reply_fields.hpp"

namespace veq::drivers {

namespace rf = reply_fields;

namespace balance_messages {

protocol::Message identify() {
  return rf::request("identify");
}
protocol::Message read() {
  return rf::request("read");
}
protocol::Message tare() {
  return rf::request("tare");
}

Result<BalanceInfo> parse_identity(const protocol::Message& reply, const std::string& device) {
  if (auto ok = rf::expect_role(reply, "balance", device, "a balance"); !ok)
    return ok.error();
  BalanceInfo info;
  info.model = rf::text_or(reply, "model", "unknown");
  info.serial_number = rf::text_or(reply, "serial_number", "");
  auto capacity = rf::number(reply, "capacity_g", device);
  if (!capacity)
    return capacity.error();
  auto readability = rf::number(reply, "readability_g", device);
  if (!readability)
    return readability.error();
  if (!(*capacity > 0.0) || !(*readability > 0.0)) {
    return make_error(ErrorKind::garbled,
                      device + ": capacity_g and readability_g must be above 0");
  }
  info.capacity_g = *capacity;
  info.readability_g = *readability;
  info.features = parse_features(reply, {"tare", "ping"});
  return info;
}

Result<MassReading> parse_reading(const protocol::Message& reply, const std::string& device) {
  auto mass = rf::number(reply, "mass_g", device);
  if (!mass)
    return mass.error();
  auto stable = rf::text(reply, "stable", device);
  if (!stable)
    return stable.error();
  if (*stable != "yes" && *stable != "no") {
    return make_error(ErrorKind::garbled,
                      device + ": field 'stable' is '" + *stable + "', not 'yes' or 'no'");
  }
  return MassReading{*mass, *stable == "yes"};
}

}  // namespace balance_messages

BalanceClient::BalanceClient(DeviceChannel& link, BalanceClientOptions options)
    : link_(link), options_(options) {}

Result<BalanceInfo> BalanceClient::identify() {
  auto reply = link_.call(balance_messages::identify());
  if (!reply)
    return reply.error();
  return balance_messages::parse_identity(*reply, describe());
}

Result<MassReading> BalanceClient::read() {
  auto reply = link_.call(balance_messages::read());
  if (!reply)
    return reply.error();
  return balance_messages::parse_reading(*reply, describe());
}

Result<MassReading> BalanceClient::read_stable() {
  Clock& clock = link_.clock();
  const Duration give_up = clock.now() + from_seconds(options_.stable_timeout_s);
  MassReading last;
  while (true) {
    auto r = read();
    if (!r)
      return r.error();
    if (r->stable)
      return r;
    last = *r;
    if (clock.now() >= give_up) {
      return make_error(ErrorKind::timeout,
                        describe() + ": no stable reading within " +
                            protocol::format_number(options_.stable_timeout_s, 1) + " s (last " +
                            protocol::format_number(last.mass_g, 4) +
                            " g); shield the balance from draughts and vibration");
    }
    clock.sleep_for(from_seconds(options_.poll_interval_s));
  }
}

Result<void> BalanceClient::tare() {
  auto reply = link_.call(balance_messages::tare());
  if (!reply)
    return reply.error();
  return {};
}

}  // namespace veq::drivers
