// Reads a constants library from a file path: the one piece of chemistry/ that
// touches the file system, kept apart so that the rest stays pure computation.
#pragma once

#include <string>

#include "chemistry/constants.hpp"
#include "common/result.hpp"

namespace veq::chemistry {

/// Reads and parses a constants file (the format of chemistry/data/constants.json).
/// Errors: not_found when the file does not exist, io when it cannot be read,
/// invalid_input (naming the entry and field) when its content is wrong.
Result<ConstantsLibrary> load_constants_library(const std::string& path);

}  // namespace veq::chemistry
