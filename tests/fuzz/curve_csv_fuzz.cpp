// Fuzz target: CSV import of a recorded curve (files from other programs).
#include <cstdint>
#include <string_view>

#include "controller/curve_csv.hpp"

extern "C" int LLVMFuzzerTestOneInput(const std::uint8_t* data, std::size_t size) {
  const std::string_view text(reinterpret_cast<const char*>(data), size);
  auto rows = veq::controller::parse_curve_csv(text, "fuzz.csv");
  if (rows)
    (void)veq::controller::to_curve(*rows, veq::detection::SignalKind::potential_mv, 50.0);
  return 0;
}
