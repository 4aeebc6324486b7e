#include "drivers/roles.hpp"

namespace veq::drivers {

namespace {

using F = FieldSpec;

/// Status fields of a motor burette (status and stop replies).
std::vector<FieldSpec> burette_status() {
  return {F{"state"},
          F{"cylinder_ml"},
          F{"delivered_ml"},
          F{"reservoir_ml", false},
          F{"last_stop", false},
          F{"fault", false},
          F{"port", false}};
}

std::vector<FieldSpec> doser_status() {
  return {F{"state"},
          F{"reagent", false},
          F{"dosed_ml"},
          F{"reservoir_ml", false},
          F{"last_stop", false},
          F{"fault", false}};
}

std::vector<FieldSpec> changer_status() {
  return {F{"state"}, F{"position"}, F{"head"}, F{"fault", false}};
}

OperationSpec op(std::string_view word, bool required, std::vector<FieldSpec> request = {},
                 std::vector<FieldSpec> reply = {}) {
  OperationSpec o;
  o.word = word;
  o.required = required;
  o.request = std::move(request);
  o.reply = std::move(reply);
  return o;
}

OperationSpec dosing(OperationSpec o) {
  o.starts_dosing = true;
  return o;
}

std::vector<RoleSpec> build_table() {
  std::vector<RoleSpec> t;
  const OperationSpec identify = op("identify", true);
  const OperationSpec ping = op("ping", false);
  const OperationSpec silence = op("host_silence_limit", false, {F{"ms"}});

  t.push_back(RoleSpec{
      Role::burette,
      {F{"cylinder_ml"}, F{"steps_per_cylinder"}, F{"max_rate_ml_per_min"}, F{"max_dose_ml"},
       F{"max_fill_rate_ml_per_min", false}, F{"ports", false}},
      {identify,
       dosing(op("dose", true, {F{"volume_ml"}, F{"rate_ml_per_min"}, F{"limit_ms", false}})),
       dosing(op("fill", false, {F{"rate_ml_per_min"}})), op("status", true, {}, burette_status()),
       op("stop", true, {}, burette_status()), op("valve", false, {F{"port"}}),
       op("reset_counter", false), silence, ping},
      {}});

  OperationSpec stream = op("stream", false, {F{"interval_ms"}});
  stream.streams = "reading";
  t.push_back(RoleSpec{
      Role::potential_sensor,
      {F{"electrode"}},
      {identify, op("read", true, {}, {F{"potential_mv"}, F{"temperature_c"}, F{"ph", false}}),
       stream, ping},
      {F{"potential_mv"}, F{"temperature_c"}, F{"ph", false}}});

  t.push_back(RoleSpec{
      Role::auxiliary_doser,
      {F{"reagents"}, F{"max_dose_ml"}, F{"max_rate_ml_per_min"}},
      {identify,
       dosing(op("dose", true,
                 {F{"reagent"}, F{"volume_ml"}, F{"rate_ml_per_min"}, F{"limit_ms", false}})),
       op("status", true, {}, doser_status()), op("stop", true, {}, doser_status()), silence, ping},
      {}});

  t.push_back(
      RoleSpec{Role::photometric_sensor,
               {F{"min_wavelength_nm"}, F{"max_wavelength_nm"}, F{"path_length_cm", false}},
               {identify,
                op("read", true, {},
                   {F{"absorbance"}, F{"transmittance_percent", false}, F{"wavelength_nm", false}}),
                op("wavelength", false, {F{"nm"}}), op("zero", false), ping},
               {}});

  t.push_back(RoleSpec{
      Role::balance,
      {F{"capacity_g"}, F{"readability_g"}},
      {identify, op("read", true, {}, {F{"mass_g"}, F{"stable"}}), op("tare", false), ping},
      {}});

  t.push_back(RoleSpec{
      Role::stirrer,
      {F{"max_speed_rpm"}, F{"min_speed_rpm", false}},
      {identify, op("speed", true, {F{"rpm"}}),
       op("status", false, {}, {F{"speed_rpm"}, F{"target_rpm", false}, F{"fault", false}}), ping},
      {}});

  t.push_back(
      RoleSpec{Role::sample_changer,
               {F{"positions"}, F{"rinse", false}},
               {identify, op("move", true, {F{"position"}}), op("lower", true), op("raise", true),
                op("rinse", false, {F{"seconds"}}), op("status", true, {}, changer_status()),
                op("stop", false, {}, changer_status()), ping},
               {}});
  return t;
}

const std::vector<RoleSpec>& table() {
  static const std::vector<RoleSpec> t = build_table();
  return t;
}

}  // namespace

std::string_view role_name(Role role) {
  switch (role) {
    case Role::burette:
      return "burette";
    case Role::potential_sensor:
      return "potential_sensor";
    case Role::auxiliary_doser:
      return "auxiliary_doser";
    case Role::photometric_sensor:
      return "photometric_sensor";
    case Role::balance:
      return "balance";
    case Role::stirrer:
      return "stirrer";
    case Role::sample_changer:
      return "sample_changer";
  }
  return "unknown";
}

std::optional<Role> role_from_name(std::string_view name) {
  for (Role r : all_roles()) {
    if (role_name(r) == name)
      return r;
  }
  return std::nullopt;
}

const std::vector<Role>& all_roles() {
  static const std::vector<Role> roles = {
      Role::burette, Role::potential_sensor, Role::auxiliary_doser, Role::photometric_sensor,
      Role::balance, Role::stirrer,          Role::sample_changer};
  return roles;
}

const RoleSpec& role_spec(Role role) {
  for (const auto& r : table()) {
    if (r.role == role)
      return r;
  }
  return table().front();  // unreachable: every Role has an entry
}

const OperationSpec* find_operation(Role role, std::string_view word) {
  for (const auto& o : role_spec(role).operations) {
    if (o.word == word)
      return &o;
  }
  return nullptr;
}

bool starts_dosing(std::string_view word) {
  return word == "dose" || word == "fill";
}

}  // namespace veq::drivers
