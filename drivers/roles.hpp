// The roles an instrument can play on a titration bench and the operations
// of each, as veq's native protocol names them (docs/protocol.md). Device
// profiles (drivers/profile.hpp) map these same operations and fields onto an
// instrument's own commands, so one table drives the protocol, the profile
// checks and the documentation.
#pragma once

#include <optional>
#include <string_view>
#include <vector>

namespace veq::drivers {

/// What an instrument does on the bench. Stored with runs: append-only values.
enum class Role : int {
  burette = 1,             ///< motor burette dosing the titrant
  potential_sensor = 2,    ///< millivolt / pH meter with an electrode
  auxiliary_doser = 3,     ///< pumps adding buffer, masking agent, indicator, water
  photometric_sensor = 4,  ///< absorbance or transmittance at a wavelength
  balance = 5,             ///< a stable mass reading
  stirrer = 6,             ///< stirring speed
  sample_changer = 7,      ///< moves vessels under the head, lowers, raises, rinses
};

/// The word of a role on the wire: "burette", "potential_sensor"...
std::string_view role_name(Role role);
/// The role a word names, if any.
std::optional<Role> role_from_name(std::string_view name);
/// Every role, in the order of their numbers.
const std::vector<Role>& all_roles();

/// One field of a request or reply.
struct FieldSpec {
  std::string_view name;  ///< carries its unit: "volume_ml"
  bool required = true;   ///< a request without it, or a reply without it, is refused
};

/// One operation of a role: the request word, its fields and the reply's.
struct OperationSpec {
  std::string_view word;
  /// Every device of the role offers it (a profile must map it).
  bool required = false;
  /// The request sets liquid moving (a dose or a fill): after a lost line the
  /// link sends "stop" before anything else (drivers/device_channel.hpp).
  bool starts_dosing = false;
  std::vector<FieldSpec> request;
  std::vector<FieldSpec> reply;
  /// A name of a field a device may send on its own (streamed readings) for
  /// this operation; empty for none.
  std::string_view streams;
};

struct RoleSpec {
  Role role;
  /// Fields an identify reply carries besides role, model, protocol,
  /// serial_number and features.
  std::vector<FieldSpec> identity;
  std::vector<OperationSpec> operations;
  /// Fields of a streamed reading (word "reading"), if the role streams.
  std::vector<FieldSpec> reading;
};

/// The table entry of a role.
const RoleSpec& role_spec(Role role);
/// The operation of a role with this word, or nullptr.
const OperationSpec* find_operation(Role role, std::string_view word);
/// Whether this request word sets liquid moving on a device of any role.
bool starts_dosing(std::string_view word);

/// Identify reply fields every role shares.
inline constexpr std::string_view kCommonIdentityFields[] = {"role", "model", "protocol",
                                                             "serial_number", "features"};

}  // namespace veq::drivers
