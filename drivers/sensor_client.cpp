#include "drivers/sensor_client.hpp"

namespace veq::drivers {

PotentialSensorClient::PotentialSensorClient(DeviceLink& link) : link_(link) {}

Result<SensorInfo> PotentialSensorClient::identify() {
  protocol::Message m;
  m.word = "identify";
  auto reply = link_.call(std::move(m));
  if (!reply)
    return reply.error();
  auto role = reply->text("role");
  if (!role || *role != "potential_sensor") {
    return make_error(ErrorKind::invalid_input, link_.describe() +
                                                    " is not a potentiometric sensor (role '" +
                                                    (role ? *role : std::string("missing")) + "')");
  }
  SensorInfo info;
  auto model = reply->find("model");
  auto electrode = reply->find("electrode");
  info.model = model ? std::string(*model) : "unknown";
  info.electrode = electrode ? std::string(*electrode) : "unknown";
  return info;
}

Result<PotentialReading> PotentialSensorClient::read() {
  protocol::Message m;
  m.word = "read";
  auto reply = link_.call(std::move(m));
  if (!reply)
    return reply.error();
  auto potential = reply->number("potential_mv");
  if (!potential)
    return make_error(ErrorKind::garbled, describe() + ": " + potential.error().message);
  auto temperature = reply->number("temperature_c");
  if (!temperature) {
    return make_error(ErrorKind::garbled, describe() + ": " + temperature.error().message);
  }
  return PotentialReading{*potential, *temperature};
}

}  // namespace veq::drivers
