// Capabilities a device states in its identify reply: the optional operations
// of its role that it offers, listed in the `features` field.
#pragma once

#include <string>
#include <string_view>
#include <vector>

#include "drivers/native_protocol.hpp"

namespace veq::drivers {

/// The optional operations an identify reply's `features` field lists
/// ("fill,valve,ping"); `fallback` when the field is absent (a device of
/// protocol revision 1, which predates the field).
std::vector<std::string> parse_features(const protocol::Message& identify,
                                        std::vector<std::string> fallback);
/// Whether a feature list holds a word.
bool has_feature(const std::vector<std::string>& features, std::string_view word);
/// "fill,valve,ping"
std::string join_features(const std::vector<std::string>& features);

}  // namespace veq::drivers
