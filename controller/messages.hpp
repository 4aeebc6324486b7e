// Small pieces of the wording of the controller's error messages, shared by
// its calculations (results, the lab's checks).
#pragma once

#include <cstdio>
#include <string>

#include "common/result.hpp"

namespace veq::controller {

/// An invalid_input error with the given text.
inline veq::Error invalid_input(const std::string& what) {
  return veq::make_error(veq::ErrorKind::invalid_input, what);
}

/// A number as people read it in a message: six significant digits.
inline std::string message_number(double x) {
  char text[40];
  std::snprintf(text, sizeof text, "%.6g", x);
  return text;
}

}  // namespace veq::controller
