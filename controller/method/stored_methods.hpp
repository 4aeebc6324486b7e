// Methods in a store: saving a changed method makes its next version, and a
// version used by a run stays as it was.
#pragma once

#include <cstdint>
#include <string>

#include "common/result.hpp"
#include "controller/method/method.hpp"
#include "controller/store/method_store.hpp"

namespace veq::method {

/// Validates `method` and stores it. If it equals the latest stored version
/// (apart from its version number) nothing is added; otherwise it becomes
/// the next version. Returns the method with its stored version number.
Result<Method> save_method(store::MethodStore& store, const Method& method);

/// Reads a stored version (0: the latest) and parses it.
Result<Method> load_method(store::MethodStore& store, const std::string& name, int version = 0);

}  // namespace veq::method
