#include "drivers/sensor_client.hpp"

namespace veq::drivers {

namespace {
protocol::Message request(std::string word) {
  protocol::Message m;
  m.word = std::move(word);
  return m;
}
}  // namespace

namespace sensor_messages {

protocol::Message identify() {
  return request("identify");
}
protocol::Message read() {
  return request("read");
}
protocol::Message stream(int interval_ms) {
  auto m = request("stream");
  m.add("interval_ms", std::to_string(interval_ms));
  return m;
}

Result<SensorInfo> parse_identity(const protocol::Message& reply, const std::string& device) {
  auto role = reply.text("role");
  if (!role || *role != "potential_sensor") {
    return make_error(ErrorKind::invalid_input, device + " is not a potentiometric sensor (role '" +
                                                    (role ? *role : std::string("missing")) + "')");
  }
  SensorInfo info;
  auto model = reply.find("model");
  auto electrode = reply.find("electrode");
  info.model = model ? std::string(*model) : "unknown";
  info.electrode = electrode ? std::string(*electrode) : "unknown";
  if (auto serial = reply.find("serial_number"))
    info.serial_number = std::string(*serial);
  info.features = parse_features(reply, {"ping"});
  return info;
}

Result<PotentialReading> parse_reading(const protocol::Message& reply, const std::string& device) {
  auto potential = reply.number("potential_mv");
  if (!potential)
    return make_error(ErrorKind::garbled, device + ": " + potential.error().message);
  auto temperature = reply.number("temperature_c");
  if (!temperature)
    return make_error(ErrorKind::garbled, device + ": " + temperature.error().message);
  PotentialReading r{*potential, *temperature, std::nullopt};
  if (reply.find("ph")) {
    auto ph = reply.number("ph");
    if (!ph)
      return make_error(ErrorKind::garbled, device + ": " + ph.error().message);
    r.ph = *ph;
  }
  return r;
}

}  // namespace sensor_messages

PotentialSensorClient::PotentialSensorClient(DeviceChannel& link) : link_(link) {}

Result<SensorInfo> PotentialSensorClient::identify() {
  auto reply = link_.call(sensor_messages::identify());
  if (!reply)
    return reply.error();
  return sensor_messages::parse_identity(*reply, link_.describe());
}

Result<PotentialReading> PotentialSensorClient::read() {
  auto reply = link_.call(sensor_messages::read());
  if (!reply)
    return reply.error();
  return sensor_messages::parse_reading(*reply, describe());
}

Result<void> PotentialSensorClient::start_streaming(std::chrono::milliseconds interval) {
  if (interval.count() < 50 || interval.count() > 60000) {
    return make_error(ErrorKind::invalid_input,
                      describe() + ": a streaming interval must be 50 to 60000 ms, not " +
                          std::to_string(interval.count()));
  }
  auto reply = link_.call(sensor_messages::stream(static_cast<int>(interval.count())));
  if (!reply)
    return reply.error();
  return {};
}

Result<void> PotentialSensorClient::stop_streaming() {
  auto reply = link_.call(sensor_messages::stream(0));
  if (!reply)
    return reply.error();
  return {};
}

Result<PotentialReading> PotentialSensorClient::next_streamed(std::chrono::milliseconds timeout) {
  auto message = link_.next_unsolicited(timeout);
  if (!message)
    return message.error();
  if (message->word != "reading") {
    return make_error(ErrorKind::garbled,
                      describe() + ": a streamed message '" + message->word + "' is not a reading");
  }
  return sensor_messages::parse_reading(*message, describe());
}

}  // namespace veq::drivers
