// Test helpers: the device end of a pseudo-terminal, driven with plain
// blocking system calls so that tests see the exact bytes on the line.
#pragma once

#include <poll.h>
#include <unistd.h>

#include <chrono>
#include <string>
#include <string_view>

namespace veq::drivers::testing {

/// Writes every byte to a descriptor (the master side of a pseudo-terminal).
inline bool write_fd(int fd, std::string_view bytes) {
  while (!bytes.empty()) {
    const ssize_t n = ::write(fd, bytes.data(), bytes.size());
    if (n <= 0)
      return false;
    bytes.remove_prefix(static_cast<std::size_t>(n));
  }
  return true;
}

/// Reads from a descriptor until `count` bytes arrived or `timeout` passed.
inline std::string read_fd(int fd, std::size_t count, std::chrono::milliseconds timeout) {
  std::string out;
  const auto deadline = std::chrono::steady_clock::now() + timeout;
  while (out.size() < count) {
    const auto left = std::chrono::duration_cast<std::chrono::milliseconds>(
        deadline - std::chrono::steady_clock::now());
    if (left.count() <= 0)
      break;
    pollfd p{fd, POLLIN, 0};
    if (::poll(&p, 1, static_cast<int>(left.count())) <= 0)
      break;
    char buffer[256];
    const ssize_t n = ::read(fd, buffer, std::min(sizeof buffer, count - out.size()));
    if (n <= 0)
      break;
    out.append(buffer, static_cast<std::size_t>(n));
  }
  return out;
}

}  // namespace veq::drivers::testing
