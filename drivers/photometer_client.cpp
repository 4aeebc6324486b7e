#include "drivers/photometer_client.hpp"

#include <cmath>

#include "drivers/reply_fields.hpp"

namespace veq::drivers {

namespace rf = reply_fields;

namespace photometer_messages {

protocol::Message identify() {
  return rf::request("identify");
}
protocol::Message read() {
  return rf::request("read");
}
protocol::Message wavelength(double nm) {
  auto m = rf::request("wavelength");
  m.add("nm", nm, 1);
  return m;
}
protocol::Message zero() {
  return rf::request("zero");
}

Result<PhotometerInfo> parse_identity(const protocol::Message& reply, const std::string& device) {
  if (auto ok = rf::expect_role(reply, "photometric_sensor", device, "a photometer"); !ok)
    return ok.error();
  PhotometerInfo info;
  info.model = rf::text_or(reply, "model", "unknown");
  info.serial_number = rf::text_or(reply, "serial_number", "");
  auto low = rf::number(reply, "min_wavelength_nm", device);
  if (!low)
    return low.error();
  auto high = rf::number(reply, "max_wavelength_nm", device);
  if (!high)
    return high.error();
  if (!(*low > 0.0) || *high < *low) {
    return make_error(ErrorKind::garbled,
                      device + ": wavelength range " + protocol::format_number(*low, 1) + " to " +
                          protocol::format_number(*high, 1) + " nm is not a range");
  }
  info.min_wavelength_nm = *low;
  info.max_wavelength_nm = *high;
  auto path = rf::optional_number(reply, "path_length_cm", device);
  if (!path)
    return path.error();
  info.path_length_cm = path->value_or(0.0);
  info.features = parse_features(reply, {"wavelength", "zero", "ping"});
  return info;
}

Result<PhotometricReading> parse_reading(const protocol::Message& reply,
                                         const std::string& device) {
  PhotometricReading r;
  auto a = rf::number(reply, "absorbance", device);
  if (!a)
    return a.error();
  r.absorbance = *a;
  auto t = rf::optional_number(reply, "transmittance_percent", device);
  if (!t)
    return t.error();
  r.transmittance_percent = t->value_or(100.0 * std::pow(10.0, -*a));
  auto nm = rf::optional_number(reply, "wavelength_nm", device);
  if (!nm)
    return nm.error();
  r.wavelength_nm = nm->value_or(0.0);
  return r;
}

}  // namespace photometer_messages

PhotometerClient::PhotometerClient(DeviceChannel& link) : link_(link) {}

Result<PhotometerInfo> PhotometerClient::identify() {
  auto reply = link_.call(photometer_messages::identify());
  if (!reply)
    return reply.error();
  auto info = photometer_messages::parse_identity(*reply, describe());
  if (!info)
    return info.error();
  info_ = *info;
  identified_ = true;
  return info;
}

Result<void> PhotometerClient::set_wavelength(double nm) {
  if (!std::isfinite(nm) || nm <= 0.0)
    return make_error(ErrorKind::invalid_input, describe() + ": a wavelength must be above 0 nm");
  if (identified_ && (nm < info_.min_wavelength_nm - 1e-9 || nm > info_.max_wavelength_nm + 1e-9)) {
    return make_error(ErrorKind::invalid_input,
                      describe() + ": " + protocol::format_number(nm, 1) +
                          " nm is outside the photometer's range of " +
                          protocol::format_number(info_.min_wavelength_nm, 1) + " to " +
                          protocol::format_number(info_.max_wavelength_nm, 1) + " nm");
  }
  auto reply = link_.call(photometer_messages::wavelength(nm));
  if (!reply)
    return reply.error();
  return {};
}

Result<void> PhotometerClient::zero() {
  auto reply = link_.call(photometer_messages::zero());
  if (!reply)
    return reply.error();
  return {};
}

Result<PhotometricReading> PhotometerClient::read() {
  auto reply = link_.call(photometer_messages::read());
  if (!reply)
    return reply.error();
  return photometer_messages::parse_reading(*reply, describe());
}

}  // namespace veq::drivers
