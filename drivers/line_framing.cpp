#include "drivers/line_framing.hpp"

#include <cstdio>

#include "common/hex.hpp"

namespace veq::drivers {

Result<std::string> parse_line_end(std::string_view text) {
  auto fail = [&](const std::string& why) {
    return make_error(ErrorKind::invalid_input, "line end '" + std::string(text) + "': " + why);
  };
  std::string bytes;
  if (text == "lf") {
    bytes = "\n";
  } else if (text == "cr") {
    bytes = "\r";
  } else if (text == "crlf") {
    bytes = "\r\n";
  } else if (text == "lfcr") {
    bytes = "\n\r";
  } else if (text == "etx") {
    bytes = "\x03";
  } else {
    for (std::size_t i = 0; i < text.size(); ++i) {
      if (text[i] != '\\') {
        return fail("expected lf, cr, crlf, lfcr, etx or escaped bytes such as \\r\\n or \\x03");
      }
      if (i + 1 >= text.size())
        return fail("a lone '\\' at the end");
      const char c = text[i + 1];
      if (c == 'r') {
        bytes += '\r';
        i += 1;
      } else if (c == 'n') {
        bytes += '\n';
        i += 1;
      } else if (c == 't') {
        bytes += '\t';
        i += 1;
      } else if (c == 'x' && i + 3 < text.size() && hex_digit(text[i + 2]) >= 0 &&
                 hex_digit(text[i + 3]) >= 0) {
        bytes += static_cast<char>(hex_digit(text[i + 2]) * 16 + hex_digit(text[i + 3]));
        i += 3;
      } else {
        return fail("unknown escape '\\" + std::string(1, c) + "' (known: \\r \\n \\t \\xNN)");
      }
    }
  }
  if (bytes.empty())
    return fail("no bytes");
  if (bytes.size() > kMaxTerminatorBytes) {
    return fail("longer than " + std::to_string(kMaxTerminatorBytes) + " bytes");
  }
  return bytes;
}

std::string line_end_name(std::string_view terminator) {
  if (terminator == "\n")
    return "lf";
  if (terminator == "\r")
    return "cr";
  if (terminator == "\r\n")
    return "crlf";
  if (terminator == "\n\r")
    return "lfcr";
  if (terminator == "\x03")
    return "etx";
  std::string out;
  for (char c : terminator) {
    char hex[8];
    std::snprintf(hex, sizeof hex, "\\x%02X", static_cast<unsigned>(static_cast<unsigned char>(c)));
    out += hex;
  }
  return out;
}

std::string escape_bytes(std::string_view bytes) {
  std::string out;
  out.reserve(bytes.size() + 8);
  for (char c : bytes) {
    const auto u = static_cast<unsigned char>(c);
    if (c == '\r') {
      out += "\\r";
    } else if (c == '\n') {
      out += "\\n";
    } else if (c == '\t') {
      out += "\\t";
    } else if (c == '\\') {
      out += "\\\\";
    } else if (u < 0x20 || u > 0x7e) {
      char hex[8];
      std::snprintf(hex, sizeof hex, "\\x%02X", static_cast<unsigned>(u));
      out += hex;
    } else {
      out += c;
    }
  }
  return out;
}

std::optional<std::string> take_line(std::string& buffer, std::string_view terminator) {
  if (terminator.empty())
    terminator = kNativeLineEnd;
  const auto end = buffer.find(terminator);
  if (end == std::string::npos)
    return std::nullopt;
  std::string line = buffer.substr(0, end);
  buffer.erase(0, end + terminator.size());
  if (terminator == kNativeLineEnd && !line.empty() && line.back() == '\r')
    line.pop_back();
  return line;
}

}  // namespace veq::drivers
