// Fuzz target: the method file parser (files written by hand), and the
// writer on whatever it accepts: what parses must write and parse again to
// the same method.
#include <cstdint>
#include <string_view>

#include "controller/method/method_file.hpp"

extern "C" int LLVMFuzzerTestOneInput(const std::uint8_t* data, std::size_t size) {
  const std::string_view text(reinterpret_cast<const char*>(data), size);
  auto method = veq::method::parse_method(text, "fuzz.method");
  if (method) {
    auto again = veq::method::parse_method(veq::method::write_method(*method), "written");
    if (!again || !(*again == *method))
      __builtin_trap();
  }
  return 0;
}
