// Echoline's one error vocabulary: Error values and Result<T> on the runtime path.
// Timeouts and instrument errors are normal events for a station, not exceptions.
// Messages read "<context>: <what happened>"; with_context() prepends a layer.
#pragma once

#include <cassert>
#include <string>
#include <string_view>
#include <utility>
#include <variant>

namespace echoline {

// What kind of failure; callers branch on this, humans read the message.
enum class ErrorKind {
  timeout,           // a deadline passed (connect, read, write, *OPC?)
  io,                // the OS refused (errno-level failure)
  closed,            // the peer closed or the link dropped
  protocol,          // bytes arrived but do not parse (garbled reply, bad block)
  instrument,        // the instrument's own error queue reported an error
  config,            // a file or setting is wrong (file, line and key in the message)
  invalid_argument,  // a caller passed a value outside the contract
  unsafe,            // refused for equipment or operator safety
  cancelled,         // the operator or a shutdown cancelled the work
  storage,           // the run store could not read or write
  internal,          // a bug: an invariant did not hold
};

std::string_view to_string(ErrorKind kind);

struct Error {
  ErrorKind kind = ErrorKind::internal;
  std::string message;          // "<context>: <what happened>"
  int instrument_code = 0;      // SCPI error number when kind == instrument

  // Returns a copy whose message reads "<context>: <message>".
  Error with_context(std::string_view context) const {
    Error e = *this;
    e.message = std::string(context) + ": " + message;
    return e;
  }
};

inline Error make_error(ErrorKind kind, std::string message) { return Error{kind, std::move(message), 0}; }

// Either a value or an Error. REQUIRES: check ok() before value() or error().
template <typename T>
class [[nodiscard]] Result {
 public:
  Result(T value) : v_(std::move(value)) {}            // NOLINT(implicit)
  Result(Error error) : v_(std::move(error)) {}        // NOLINT(implicit)

  bool ok() const { return v_.index() == 0; }
  explicit operator bool() const { return ok(); }

  T& value() & { assert(ok()); return std::get<0>(v_); }
  const T& value() const& { assert(ok()); return std::get<0>(v_); }
  T&& value() && { assert(ok()); return std::get<0>(std::move(v_)); }
  T& operator*() & { return value(); }
  const T& operator*() const& { return value(); }
  T* operator->() { return &value(); }
  const T* operator->() const { return &value(); }

  const Error& error() const { assert(!ok()); return std::get<1>(v_); }

 private:
  std::variant<T, Error> v_;
};

// Success or an Error.
class [[nodiscard]] Status {
 public:
  Status() = default;
  Status(Error error) : error_(std::move(error)), ok_(false) {}  // NOLINT(implicit)
  static Status success() { return {}; }

  bool ok() const { return ok_; }
  explicit operator bool() const { return ok_; }
  const Error& error() const { assert(!ok_); return error_; }

 private:
  Error error_{};
  bool ok_ = true;
};

}  // namespace echoline
