// The series file: a human-editable text form of a Series, in the section
// format of method files (controller/method/section_text.hpp).
//
//   [series]
//   name = Aldergate wells, 3 December
//   check standard every = 3
//   [calibration]
//   electrode = calcium electrode 1
//   standards = 0.0001, 0.001, 0.01 mol/L
//   positions = 1, 2, 3
//   [sample]
//   id = well 3
//   method = tap water hardness
//   positions = 10, 11, 12
//   aliquots = 50 mL
//
// Entries run in the order of their sections. docs/series.md lists every
// section and key with its unit and default.
#pragma once

#include <string>
#include <string_view>

#include "common/result.hpp"
#include "controller/series/series.hpp"

namespace veq::series {

/// Reads a series file. Errors (invalid_input) start with `origin` and name
/// the line and the field: an unknown section or key, a missing required
/// key, a value out of range or in the wrong unit, fewer positions than
/// replicates, a position used twice, portions that do not match the
/// replicates, two check-standard entries when one repeats every N samples.
Result<Series> parse_series(std::string_view text, const std::string& origin = "series file");

/// Writes a series file; parse_series(write_series(s)) == s for every series
/// parse_series accepts.
std::string write_series(const Series& series);

Result<Series> read_series_file(const std::string& path);

}  // namespace veq::series
