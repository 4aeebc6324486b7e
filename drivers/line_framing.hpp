// Line framing shared by every transport: which bytes end a received line
// (configurable per instrument: "\n", "\r", "\r\n" or any short sequence),
// and how a buffer of received bytes yields whole lines.
#pragma once

#include <optional>
#include <string>
#include <string_view>

#include "common/result.hpp"

namespace veq::drivers {

/// Longest terminator accepted (bytes). Instruments end lines with one or two
/// bytes; four leaves room for odd ones (ETX followed by CR LF) without
/// letting a terminator swallow a message.
inline constexpr std::size_t kMaxTerminatorBytes = 4;

/// veq's native protocol ends lines with "\n" (a "\r" before it is dropped).
inline constexpr std::string_view kNativeLineEnd = "\n";

/// Parses a terminator as written in profiles and options: a name ("lf",
/// "cr", "crlf", "lfcr", "etx") or bytes written with escapes ("\r\n",
/// "\x03\r"). Errors are ErrorKind::invalid_input and quote the text.
Result<std::string> parse_line_end(std::string_view text);

/// A terminator for messages: "lf", "cr", "crlf" or the bytes as \xNN.
std::string line_end_name(std::string_view terminator);

/// Bytes for people: printable ASCII as is, "\r" "\n" "\t" "\\" escaped, any
/// other byte as \xNN. Used by the traffic log and in error messages.
std::string escape_bytes(std::string_view bytes);

/// Takes the next complete line off the front of `buffer`, without its
/// terminator. With the native "\n", a "\r" before it is dropped too, so
/// devices that end lines with "\r\n" need no setting. Returns nothing if no
/// terminator has arrived yet.
std::optional<std::string> take_line(std::string& buffer, std::string_view terminator);

}  // namespace veq::drivers
