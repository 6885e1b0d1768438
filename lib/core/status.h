// Status and Result<T>: how nightjar reports failure across module edges.
//
// Our code never throws. A call that can fail returns a Status (cheap when OK) or a
// Result<T> holding either a value or a non-OK Status. Messages name where the
// problem is (file, line, key path, channel) so an operator can act on them.
// Thread-safety: plain values; safe to copy between threads.
#pragma once

#include <cassert>
#include <optional>
#include <string>
#include <utility>

namespace nightjar::core {

enum class StatusCode {
  kOk = 0,
  kInvalidArgument,     // caller passed something malformed
  kNotFound,            // a named thing (channel, file) does not exist
  kFailedPrecondition,  // the operation is not allowed in the present state
  kOutOfRange,          // a value outside its allowed bounds
  kDataLoss,            // stored data is corrupt or unreadable
  kUnavailable,         // a peer (broker, file system) cannot be reached now
  kInternal,            // a bug: an invariant did not hold
};

class [[nodiscard]] Status {
 public:
  Status() = default;  // OK
  Status(StatusCode code, std::string message) : code_(code), message_(std::move(message)) {}

  static Status Ok() { return {}; }
  static Status InvalidArgument(std::string m) {
    return {StatusCode::kInvalidArgument, std::move(m)};
  }
  static Status NotFound(std::string m) { return {StatusCode::kNotFound, std::move(m)}; }
  static Status FailedPrecondition(std::string m) {
    return {StatusCode::kFailedPrecondition, std::move(m)};
  }
  static Status OutOfRange(std::string m) { return {StatusCode::kOutOfRange, std::move(m)}; }
  static Status DataLoss(std::string m) { return {StatusCode::kDataLoss, std::move(m)}; }
  static Status Unavailable(std::string m) { return {StatusCode::kUnavailable, std::move(m)}; }
  static Status Internal(std::string m) { return {StatusCode::kInternal, std::move(m)}; }

  bool ok() const { return code_ == StatusCode::kOk; }
  StatusCode code() const { return code_; }
  const std::string& message() const { return message_; }

 private:
  StatusCode code_ = StatusCode::kOk;
  std::string message_;
};

// Either a T or the Status saying why there is none.
template <typename T>
class [[nodiscard]] Result {
 public:
  Result(T value) : value_(std::move(value)) {}         // NOLINT(google-explicit-constructor)
  Result(Status status) : status_(std::move(status)) {  // NOLINT(google-explicit-constructor)
    assert(!status_.ok() && "a Result built from a Status must carry an error");
  }

  bool ok() const { return value_.has_value(); }
  const Status& status() const { return status_; }
  T& value() & {
    assert(ok());
    return *value_;
  }
  const T& value() const& {
    assert(ok());
    return *value_;
  }
  T&& value() && {
    assert(ok());
    return std::move(*value_);
  }
  T* operator->() { return &value(); }
  const T* operator->() const { return &value(); }
  T& operator*() & { return value(); }
  const T& operator*() const& { return value(); }

 private:
  std::optional<T> value_;
  Status status_;
};

}  // namespace nightjar::core
