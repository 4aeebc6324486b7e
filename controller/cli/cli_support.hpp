// Small pieces every command of the `veq` executable shares: opening the
// store with a command-line error, and reading a password.
#pragma once

#include <cstdio>
#include <iostream>
#include <memory>
#include <string>

#include <CLI/CLI.hpp>

#include "controller/store/sqlite_store.hpp"

namespace veq::cli {

/// Opens (creating and migrating) the store, or stops the command with the
/// store's message and exit status 2.
inline std::unique_ptr<store::SqliteStore> open_store_or_throw(const std::string& path) {
  auto s = store::SqliteStore::open(path);
  if (!s)
    throw CLI::Error("StoreError", s.error().message, 2);
  return std::move(s).value();
}

/// A password from standard input, one line: typed at a terminal, or piped
/// in by a script (never on the command line, where `ps` would show it).
inline std::string read_password(const std::string& prompt) {
  std::fprintf(stderr, "%s: ", prompt.c_str());
  std::fflush(stderr);
  std::string line;
  if (!std::getline(std::cin, line))
    throw CLI::Error("PasswordError", "no password on standard input", 2);
  if (!line.empty() && line.back() == '\r')
    line.pop_back();
  return line;
}

}  // namespace veq::cli
