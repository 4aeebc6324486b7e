// Fuzz target: the native protocol's line parser and the line framing that
// cuts a byte stream into lines (garbled replies from a device).
#include <cstdint>
#include <string>
#include <string_view>

#include "drivers/native_protocol.hpp"

extern "C" int LLVMFuzzerTestOneInput(const std::uint8_t* data, std::size_t size) {
  const std::string_view text(reinterpret_cast<const char*>(data), size);
  std::size_t start = 0;
  while (start <= text.size()) {
    const std::size_t end = text.find('\n', start);
    const std::string_view line =
        text.substr(start, end == std::string_view::npos ? std::string_view::npos : end - start);
    auto message = veq::drivers::protocol::parse(line);
    if (message) {
      // What parses must encode again (a line with its terminator) and
      // parse to the same word.
      std::string encoded = veq::drivers::protocol::encode(*message);
      if (!encoded.empty() && encoded.back() == '\n')
        encoded.pop_back();
      auto again = veq::drivers::protocol::parse(encoded);
      if (!again || again->word != message->word)
        __builtin_trap();
    }
    if (end == std::string_view::npos)
      break;
    start = end + 1;
  }
  return 0;
}
