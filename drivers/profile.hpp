// Device profiles: a text file that tells veq how to speak to an instrument
// that talks plain ASCII in its own dialect, without writing code. Each
// operation of the instrument's role (drivers/roles.hpp) gets a command
// template and a reply pattern; fields are scaled between the instrument's
// units and veq's (steps to mL); words are mapped (the instrument's "B" is
// veq's "dosing"). docs/device-profiles.md describes the format.
//
// The functions here are pure: text in, text out, no port. The host side
// (encode_command, read_reply) drives a ProfileLink; the device side
// (parse_command, encode_reply) lets the simulator play an instrument that
// speaks the profile, so that clients are tested over it byte for byte.
#pragma once

#include <chrono>
#include <map>
#include <optional>
#include <string>
#include <string_view>
#include <utility>
#include <vector>

#include "common/result.hpp"
#include "drivers/native_protocol.hpp"
#include "drivers/roles.hpp"

namespace veq::drivers::profile {

/// Format revision of profile files this code reads ("veq_profile 1").
inline constexpr int kFormatVersion = 1;

/// How a field is written inside a template.
enum class ValueType : int {
  integer = 1,  ///< {name:int} or {name:int6}: a whole number, zero-padded to at least 6 digits
  fixed = 2,    ///< {name:fix2}: a decimal number with 2 decimals
  word = 3,     ///< {name} or {name:word}: one or more characters other than space
  text = 4,     ///< {name:text}: the rest of the line (last in a pattern)
};

/// One piece of a template: literal text, a run of spaces, or a field.
struct Piece {
  enum class Kind : int { literal = 1, spaces = 2, field = 3 } kind = Kind::literal;
  std::string text;   ///< the literal, or the run of spaces as written
  std::string field;  ///< the field's name (Kind::field)
  ValueType type = ValueType::word;
  int digits = 0;  ///< integer: zero-padded width; fixed: decimals
};

/// A command template or a reply pattern, as written and as pieces.
struct Template {
  std::string source;
  std::vector<Piece> pieces;
  int line = 0;  ///< where it was written
  /// The names of the fields it carries.
  std::vector<std::string> fields() const;
};

/// wire value = native value * factor + offset.
struct Scale {
  double factor = 1.0;
  double offset = 0.0;
};

/// One operation of the role, as the instrument does it.
struct Operation {
  std::string word;  ///< the native operation ("dose")
  std::optional<Template> send;
  std::optional<Template> reply;
  /// Another operation run right after this one, whose reply fields are
  /// merged into this one's (a "stop" answered with a bare acknowledgement
  /// followed by "status" to learn where the motor stopped).
  std::string then;
  int then_line = 0;
  /// Fields the reply always carries though the instrument does not send
  /// them (a meter without a temperature probe: temperature_c 25).
  std::vector<protocol::Field> fixed;
  int line = 0;
};

struct Profile {
  std::string source;  ///< file name, for messages
  Role role = Role::burette;
  std::string model;
  std::string command_end;  ///< bytes after every command
  std::string reply_end;    ///< bytes that end every reply line
  /// Overrides the link's reply deadline, for slow instruments.
  std::optional<std::chrono::milliseconds> reply_timeout;
  /// The instrument sends each command back before its reply.
  bool echo = false;
  /// Fields of the identify reply the instrument does not report itself.
  std::vector<protocol::Field> facts;
  std::map<std::string, Scale, std::less<>> scales;
  /// field -> (wire word, native word) pairs.
  std::map<std::string, std::vector<std::pair<std::string, std::string>>, std::less<>> maps;
  /// Patterns of refusal lines; captures "reason" (mapped) and "message".
  std::vector<Template> errors;
  /// Pattern of a reading the instrument sends on its own, if it streams.
  std::optional<Template> unsolicited;
  std::vector<Operation> operations;

  const Operation* find(std::string_view word) const;
  /// The optional operations of the role this profile maps ("fill,valve").
  std::vector<std::string> features() const;
};

/// Parses a profile. Errors are ErrorKind::invalid_input:
/// "<source>: line <n>: <reason>".
Result<Profile> parse_profile(std::string_view text, std::string_view source_name);
/// Reads and parses a profile file (ErrorKind::not_found if it is missing).
Result<Profile> load_profile(const std::string& path);

// ---- host side ----

/// The bytes of a request, command end included. ErrorKind::invalid_input if
/// the profile has no such operation or the request lacks a field it needs.
Result<std::string> encode_command(const Profile& profile, const protocol::Message& request);

/// Reads one line received while waiting for `operation`'s reply: a message
/// with word "ok" (the reply's fields, in veq's units, with the operation's
/// fixed fields), "error" (reason and message) or "reading" (a streamed
/// reading); ErrorKind::garbled naming the line if it matches none of them.
Result<protocol::Message> read_reply(const Profile& profile, const Operation& operation,
                                     std::string_view line);
/// Reads a line that should be a streamed reading ("reading"), or garbled.
Result<protocol::Message> read_unsolicited(const Profile& profile, std::string_view line);

// ---- device side (the simulator playing the instrument) ----

/// The request a command line stands for (its word and fields in veq's
/// units); ErrorKind::garbled if it matches no operation's template.
Result<protocol::Message> parse_command(const Profile& profile, std::string_view line);
/// The bytes answering `word` with a native reply ("ok" fields or an "error"
/// with a reason), reply end included.
Result<std::string> encode_reply(const Profile& profile, std::string_view word,
                                 const protocol::Message& reply);
/// The bytes of a streamed reading, reply end included.
Result<std::string> encode_unsolicited(const Profile& profile, const protocol::Message& reading);

/// A template's pieces filled from fields (exposed for tests).
Result<std::string> fill_template(const Profile& profile, const Template& t,
                                  const protocol::Message& values);
/// Matches a whole line against a template; the captured fields in veq's
/// units, or nothing if it does not match (exposed for tests).
Result<std::optional<std::vector<protocol::Field>>> match_template(const Profile& profile,
                                                                   const Template& t,
                                                                   std::string_view line);

}  // namespace veq::drivers::profile
