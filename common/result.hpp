// The one error vocabulary shared by every veq module: an error kind, a message
// that says what happened, where, and what the user can do, and a small
// result-or-error value for expected failures (timeouts, parse errors, bad rows).
#pragma once

#include <stdexcept>
#include <string>
#include <utility>
#include <variant>

namespace veq {

/// What went wrong, coarsely; stored in the database, so append only.
enum class ErrorKind : int {
  invalid_input = 1,   ///< bad value or file given by the user
  timeout = 2,         ///< a device did not answer before its deadline
  garbled = 3,         ///< bytes arrived but could not be parsed (checksum, syntax)
  device_refused = 4,  ///< the device answered with an error reply
  disconnected = 5,    ///< the line is closed or the device is gone
  io = 6,              ///< operating-system I/O failure
  storage = 7,         ///< database failure
  no_convergence = 8,  ///< a numerical solver did not converge
  aborted = 9,         ///< stopped on request
  device_fault = 10,   ///< the device reported a fault in its status (stalled, empty)
  not_found = 11,      ///< a run, file or record does not exist
};

/// A short, stable name for an error kind ("timeout", "garbled", ...).
const char* error_kind_name(ErrorKind kind) noexcept;

/// An expected failure: its kind and a message for the user.
struct Error {
  ErrorKind kind = ErrorKind::invalid_input;
  std::string message;

  /// "timeout: burette on memory:burette did not answer 'dose' within 2000 ms"
  std::string describe() const { return std::string(error_kind_name(kind)) + ": " + message; }
};

/// Thrown only at outer edges (command line, ui) or for programming errors.
class VeqException : public std::runtime_error {
 public:
  explicit VeqException(Error error)
      : std::runtime_error(error.describe()), error_(std::move(error)) {}
  const Error& error() const noexcept { return error_; }

 private:
  Error error_;
};

/// A value or an Error. Deliberately small: has_value(), value(), error().
template <typename T>
class [[nodiscard]] Result {
 public:
  Result(T value) : state_(std::in_place_index<0>, std::move(value)) {}      // NOLINT implicit
  Result(Error error) : state_(std::in_place_index<1>, std::move(error)) {}  // NOLINT implicit

  bool has_value() const noexcept { return state_.index() == 0; }
  explicit operator bool() const noexcept { return has_value(); }

  /// The value; throws VeqException if this holds an error (a programming error).
  T& value() & {
    check();
    return std::get<0>(state_);
  }
  const T& value() const& {
    check();
    return std::get<0>(state_);
  }
  T&& value() && {
    check();
    return std::get<0>(std::move(state_));
  }
  T* operator->() { return &value(); }
  const T* operator->() const { return &value(); }
  T& operator*() & { return value(); }
  const T& operator*() const& { return value(); }

  const Error& error() const {
    if (has_value())
      throw std::logic_error("Result::error() called on a value");
    return std::get<1>(state_);
  }

 private:
  void check() const {
    if (!has_value())
      throw VeqException(std::get<1>(state_));
  }
  std::variant<T, Error> state_;
};

/// Result of an operation that yields nothing but may fail.
template <>
class [[nodiscard]] Result<void> {
 public:
  Result() = default;
  Result(Error error) : error_(std::move(error)), failed_(true) {}  // NOLINT implicit

  bool has_value() const noexcept { return !failed_; }
  explicit operator bool() const noexcept { return !failed_; }
  void value() const {
    if (failed_)
      throw VeqException(error_);
  }
  const Error& error() const {
    if (!failed_)
      throw std::logic_error("Result::error() called on a success");
    return error_;
  }

 private:
  Error error_;
  bool failed_ = false;
};

/// Convenience: build an Error.
inline Error make_error(ErrorKind kind, std::string message) {
  return Error{kind, std::move(message)};
}

inline const char* error_kind_name(ErrorKind kind) noexcept {
  switch (kind) {
    case ErrorKind::invalid_input:
      return "invalid input";
    case ErrorKind::timeout:
      return "timeout";
    case ErrorKind::garbled:
      return "garbled reply";
    case ErrorKind::device_refused:
      return "device refused";
    case ErrorKind::disconnected:
      return "disconnected";
    case ErrorKind::io:
      return "i/o error";
    case ErrorKind::storage:
      return "storage error";
    case ErrorKind::no_convergence:
      return "no convergence";
    case ErrorKind::aborted:
      return "aborted";
    case ErrorKind::device_fault:
      return "device fault";
    case ErrorKind::not_found:
      return "not found";
  }
  return "error";
}

}  // namespace veq
