// veq's own line protocol (docs/protocol.md): pure encode and parse functions
// over strings, independent of any port.
//
// One message per line:  <sequence> <word> [<name>=<value> ...] *<crc>\n
// Requests carry a command word ("dose"); replies carry "ok" or "error" and
// echo the request's sequence number. <crc> is the CRC-16/CCITT-FALSE of every
// byte before the '*', as four upper-case hex digits.
#pragma once

#include <cstdint>
#include <optional>
#include <string>
#include <string_view>
#include <vector>

#include "common/result.hpp"

namespace veq::drivers::protocol {

/// Protocol revision a device reports in its identify reply. Revision 2 adds
/// the roles beyond burette and potentiometric sensor, `features` and
/// `serial_number` in identify, streamed readings and the burette's valve;
/// every revision-1 message keeps its meaning.
inline constexpr int kRevision = 2;

/// One name=value pair. Values are tokens without spaces, or quoted text.
struct Field {
  std::string name;
  std::string value;
};

/// A request or a reply.
struct Message {
  std::uint32_t sequence = 0;  ///< 0..65535, chosen by the host, echoed in the reply
  std::string word;            ///< command ("dose", "read") or reply status ("ok", "error")
  std::vector<Field> fields;

  /// The value of a field, if present.
  std::optional<std::string_view> find(std::string_view name) const;
  /// A numeric field; an error naming the field if missing or not a finite number.
  Result<double> number(std::string_view name) const;
  /// A text field; an error naming the field if missing.
  Result<std::string> text(std::string_view name) const;

  Message& add(std::string name, std::string value);
  /// Adds a number with a fixed count of decimals ("0.0500").
  Message& add(std::string name, double value, int decimals);
};

/// CRC-16/CCITT-FALSE (polynomial 0x1021, initial value 0xFFFF, no reflection).
/// Check value for "123456789" is 0x29B1.
std::uint16_t crc16_ccitt(std::string_view bytes);

/// A finite number with a fixed count of decimals, '.' as decimal separator
/// whatever the locale.
std::string format_number(double value, int decimals);

/// The bytes of a message, checksum and "\n" included.
std::string encode(const Message& message);

/// Parses one line (without its terminator). Errors are ErrorKind::garbled and
/// say what is wrong and where (column).
Result<Message> parse(std::string_view line);

/// A reply "ok" with the request's sequence.
Message ok_reply(std::uint32_t sequence);
/// A reply "error" with a reason word and a message for people.
Message error_reply(std::uint32_t sequence, std::string reason, std::string message);

}  // namespace veq::drivers::protocol
