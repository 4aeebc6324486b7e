#include "drivers/transport.hpp"

namespace veq::drivers {

Result<void> Transport::set_line_end(std::string_view terminator) {
  if (terminator == kNativeLineEnd)
    return {};
  return make_error(ErrorKind::invalid_input, describe() + " cannot end lines with '" +
                                                  line_end_name(terminator) + "' (only lf)");
}

Result<void> Transport::reopen() {
  return make_error(ErrorKind::disconnected, describe() + " cannot be reopened");
}

}  // namespace veq::drivers
