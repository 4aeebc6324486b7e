// The method file: a human-editable text form of a Method.
//
//   # comment lines start with '#'
//   [method]
//   name = Tap water total hardness
//   replicates = 2
//   [titrant]
//   name = EDTA 0.01 mol/L
//   burette = burette 1
//   [step]
//   kind = add reagent
//   reagent = ammonia buffer pH 10
//   volume = 2 mL
//
// Sections [method] and [indication] appear once; [result] once per result
// (a method titrating in stages may give one per metal); [titrant],
// [reagent] and [step] as often as needed, steps in the order they run.
// Quantities carry their unit ("2 mL", "90 s", "1.5 min"). docs/methods.md
// lists every section, key, unit and default.
#pragma once

#include <string>
#include <string_view>

#include "common/result.hpp"
#include "controller/method/method.hpp"

namespace veq::method {

/// Reads a method file. `origin` (a file name) starts every error message.
/// Errors (invalid_input) name the line and the field: an unknown section or
/// key, a missing required field, a value out of range or in the wrong unit,
/// an unknown step kind, a titrant or reagent not declared, steps in an
/// impossible order (evaluate before any titration, a titration never
/// evaluated, a back-titration without an excess added before it), a result
/// naming a stage that does not exist or another result that is not before it.
Result<Method> parse_method(std::string_view text, const std::string& origin = "method file");

/// Writes a method file; parse_method(write_method(m)) == m for every method
/// that passes validate_method(). Every field is written, defaults included,
/// so that a file says all it does. Text fields are written on one line.
std::string write_method(const Method& method);

/// The checks of parse_method() that need no file: references between
/// sections, ranges, the order of steps. Errors name the step number and field.
Result<void> validate_method(const Method& method);

/// Reads a method file from disk (errors name the path and line).
Result<Method> read_method_file(const std::string& path);

}  // namespace veq::method
