// Status: the outcome of an engine call that can fail for a reason the caller must see.
//
// OK is cheap (no allocation). Failures carry a code and one sentence that names what failed.
// Numerical failures (rank deficiency, an infeasible downdate, a non-finite input) are returned,
// never thrown from inside a hot loop and never leaked as NaN.
//
// Thread safety: a Status is a value; distinct objects may be used from distinct threads.
#pragma once

#include <string>
#include <string_view>
#include <utility>

namespace rimwatch {

enum class StatusCode {
  kOk = 0,
  kInvalidArgument,  // the caller passed something that breaks a documented rule
  kNonFinite,        // an input held NaN or +-Inf
  kRankDeficient,    // the regressor matrix of the window does not have full column rank
  kNotEnoughRows,    // fewer rows than the statistic needs
  kUnavailable,      // the quantity is undefined here (e.g. SE of a repeated eigenvalue)
  kNumerical,        // a numerical routine failed (e.g. eigen solver did not converge)
  kIoError,          // outside the engine: a file, database or socket operation failed
};

// Stable lower-case name of a code, used in messages and JSON ("rank_deficient", ...).
std::string_view StatusCodeName(StatusCode code);

class Status {
 public:
  Status() = default;  // OK
  static Status Ok() { return Status(); }
  static Status InvalidArgument(std::string msg) {
    return Status(StatusCode::kInvalidArgument, std::move(msg));
  }
  static Status NonFinite(std::string msg) {
    return Status(StatusCode::kNonFinite, std::move(msg));
  }
  static Status RankDeficient(std::string msg) {
    return Status(StatusCode::kRankDeficient, std::move(msg));
  }
  static Status NotEnoughRows(std::string msg) {
    return Status(StatusCode::kNotEnoughRows, std::move(msg));
  }
  static Status Unavailable(std::string msg) {
    return Status(StatusCode::kUnavailable, std::move(msg));
  }
  static Status Numerical(std::string msg) {
    return Status(StatusCode::kNumerical, std::move(msg));
  }
  static Status IoError(std::string msg) { return Status(StatusCode::kIoError, std::move(msg)); }

  bool ok() const { return code_ == StatusCode::kOk; }
  StatusCode code() const { return code_; }
  const std::string& message() const { return message_; }
  // "rank_deficient: regressor L1.b is collinear with earlier regressors"; "ok" when OK.
  std::string ToString() const;

 private:
  Status(StatusCode code, std::string msg) : code_(code), message_(std::move(msg)) {}
  StatusCode code_ = StatusCode::kOk;
  std::string message_;
};

}  // namespace rimwatch
