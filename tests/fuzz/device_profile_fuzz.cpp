// Fuzz target: the device-profile parser, and the replies a parsed profile
// then reads (a profile file and an instrument's lines from outside).
#include <cstdint>
#include <string_view>

#include "drivers/profile.hpp"

extern "C" int LLVMFuzzerTestOneInput(const std::uint8_t* data, std::size_t size) {
  const std::string_view text(reinterpret_cast<const char*>(data), size);
  // A line "----" splits the profile from lines read through it.
  const std::size_t split = text.find("\n----\n");
  const std::string_view profile_text = text.substr(0, split);
  auto profile = veq::drivers::profile::parse_profile(profile_text, "fuzz.profile");
  if (!profile || split == std::string_view::npos)
    return 0;
  std::string_view rest = text.substr(split + 6);
  while (!rest.empty()) {
    const std::size_t end = rest.find('\n');
    const std::string_view line = rest.substr(0, end);
    (void)veq::drivers::profile::read_unsolicited(*profile, line);
    (void)veq::drivers::profile::parse_command(*profile, line);
    if (end == std::string_view::npos)
      break;
    rest.remove_prefix(end + 1);
  }
  return 0;
}
