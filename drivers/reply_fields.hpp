// Small helpers the device clients share to read reply fields: every missing
// or malformed field becomes ErrorKind::garbled naming the device and field.
#pragma once

#include <cmath>
#include <optional>
#include <string>
#include <string_view>

#include "common/result.hpp"
#include "drivers/native_protocol.hpp"

namespace veq::drivers::reply_fields {

/// A request with no fields yet.
inline protocol::Message request(std::string word) {
  protocol::Message m;
  m.word = std::move(word);
  return m;
}

/// A number that must be present.
inline Result<double> number(const protocol::Message& reply, std::string_view name,
                             const std::string& device) {
  auto v = reply.number(name);
  if (!v)
    return make_error(ErrorKind::garbled, device + ": " + v.error().message);
  return *v;
}

/// A number that may be absent.
inline Result<std::optional<double>> optional_number(const protocol::Message& reply,
                                                     std::string_view name,
                                                     const std::string& device) {
  if (!reply.find(name))
    return std::optional<double>();
  auto v = number(reply, name, device);
  if (!v)
    return v.error();
  return std::optional<double>(*v);
}

/// A whole number within [low, high] that must be present.
inline Result<int> whole(const protocol::Message& reply, std::string_view name, int low, int high,
                         const std::string& device) {
  auto v = number(reply, name, device);
  if (!v)
    return v.error();
  if (std::floor(*v) != *v || *v < low || *v > high) {
    return make_error(ErrorKind::garbled, device + ": field '" + std::string(name) + "' value " +
                                              protocol::format_number(*v, 3) +
                                              " is not a whole number from " + std::to_string(low) +
                                              " to " + std::to_string(high));
  }
  return static_cast<int>(*v);
}

/// Text that must be present.
inline Result<std::string> text(const protocol::Message& reply, std::string_view name,
                                const std::string& device) {
  auto v = reply.text(name);
  if (!v)
    return make_error(ErrorKind::garbled, device + ": " + v.error().message);
  return *v;
}

/// Text, or `fallback` when absent.
inline std::string text_or(const protocol::Message& reply, std::string_view name,
                           std::string fallback) {
  auto v = reply.find(name);
  return v ? std::string(*v) : fallback;
}

/// The identify reply names the expected role, or the device is the wrong one
/// (ErrorKind::invalid_input: a wrong cable or port, not a line fault).
inline Result<void> expect_role(const protocol::Message& reply, std::string_view role,
                                const std::string& device, const std::string& what) {
  auto found = reply.find("role");
  if (!found || *found != role) {
    return make_error(ErrorKind::invalid_input,
                      device + " is not " + what + " (role '" +
                          (found ? std::string(*found) : std::string("missing")) +
                          "'); check which instrument is on this port");
  }
  return {};
}

}  // namespace veq::drivers::reply_fields
