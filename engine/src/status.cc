#include "rimwatch/engine/status.h"

namespace rimwatch {

std::string_view StatusCodeName(StatusCode code) {
  switch (code) {
    case StatusCode::kOk:
      return "ok";
    case StatusCode::kInvalidArgument:
      return "invalid_argument";
    case StatusCode::kNonFinite:
      return "non_finite";
    case StatusCode::kRankDeficient:
      return "rank_deficient";
    case StatusCode::kNotEnoughRows:
      return "not_enough_rows";
    case StatusCode::kUnavailable:
      return "unavailable";
    case StatusCode::kNumerical:
      return "numerical";
    case StatusCode::kIoError:
      return "io_error";
  }
  return "unknown";
}

std::string Status::ToString() const {
  if (ok()) return "ok";
  std::string out(StatusCodeName(code_));
  out += ": ";
  out += message_;
  return out;
}

}  // namespace rimwatch
