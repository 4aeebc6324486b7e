// Fuzz target: the sample document of `veq predict` and the endpoint
// methods' "sample" option.
#include <cstdint>
#include <string_view>

#include "chemistry/sample.hpp"

extern "C" int LLVMFuzzerTestOneInput(const std::uint8_t* data, std::size_t size) {
  (void)veq::chemistry::parse_sample_json(
      std::string_view(reinterpret_cast<const char*>(data), size));
  return 0;
}
