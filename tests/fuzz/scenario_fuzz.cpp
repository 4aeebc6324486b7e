// Fuzz target: simulator scenario files and replayed CSV curves.
#include <cstdint>
#include <string_view>

#include "simulator/scenario.hpp"

extern "C" int LLVMFuzzerTestOneInput(const std::uint8_t* data, std::size_t size) {
  const std::string_view text(reinterpret_cast<const char*>(data), size);
  (void)veq::simulator::parse_scenario(text, "fuzz.json");
  (void)veq::simulator::parse_replay_csv(text, "fuzz.csv");
  return 0;
}
