#include "controller/method/stored_methods.hpp"

#include "controller/method/method_file.hpp"

namespace veq::method {

Result<Method> save_method(store::MethodStore& store, const Method& method) {
  if (auto valid = validate_method(method); !valid)
    return valid.error();
  int latest = 0;
  auto existing = store.load_method_version(method.name);
  if (existing) {
    latest = existing->version;
    auto parsed = parse_method(existing->text, "stored method '" + method.name + "'");
    if (parsed) {
      Method same = method;
      same.version = parsed->version;
      if (same == *parsed)
        return *parsed;
    }
  } else if (existing.error().kind != ErrorKind::not_found) {
    return existing.error();
  }
  Method next = method;
  next.version = latest + 1;
  auto saved = store.save_method_version(next.name, write_method(next));
  if (!saved)
    return saved.error();
  if (saved->version != next.version) {
    return make_error(ErrorKind::storage, "method '" + next.name +
                                              "' was saved by someone else meanwhile (now at "
                                              "version " +
                                              std::to_string(saved->version) +
                                              "); load it and save again");
  }
  return next;
}

Result<Method> load_method(store::MethodStore& store, const std::string& name, int version) {
  auto record = store.load_method_version(name, version);
  if (!record)
    return record.error();
  auto parsed = parse_method(
      record->text, "stored method '" + name + "' version " + std::to_string(record->version));
  if (!parsed)
    return parsed.error();
  parsed->version = record->version;
  return parsed;
}

}  // namespace veq::method
