// Raw SQL on a store file behind veq's back, for tests of what the database
// itself refuses and of tampering.
#pragma once

#include <sqlite3.h>

#include <string>

namespace veq::store::testing {

/// Runs `sql` on the file at `path` through a connection of its own; returns
/// SQLite's result code and, if asked, its message.
inline int exec_raw(const std::string& path, const std::string& sql, std::string* error = nullptr) {
  sqlite3* db = nullptr;
  sqlite3_open(path.c_str(), &db);
  char* message = nullptr;
  const int rc = sqlite3_exec(db, sql.c_str(), nullptr, nullptr, &message);
  if (error && message)
    *error = message;
  sqlite3_free(message);
  sqlite3_close(db);
  return rc;
}

}  // namespace veq::store::testing
