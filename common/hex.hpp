// Hexadecimal digits, shared by the wire protocol's escapes, device
// profiles and the audit trail's hashes and key file.
#pragma once

namespace veq {

/// The value of one hex digit (0-9, a-f, A-F), or -1 for any other character.
constexpr int hex_digit(char c) noexcept {
  if (c >= '0' && c <= '9')
    return c - '0';
  if (c >= 'a' && c <= 'f')
    return c - 'a' + 10;
  if (c >= 'A' && c <= 'F')
    return c - 'A' + 10;
  return -1;
}

}  // namespace veq
