// Period labels of observations: an integer, an ISO 8601 calendar date, or an ISO 8601 timestamp.
//
// Every stored or wire period is parsed once into a Period with an integer sort key, so row
// assembly and the store order periods by a number, never by text:
//   integer    key = the integer itself                          text "17", "-3"
//   date       key = days since 1970-01-01 (proleptic Gregorian) text "2026-03-31"
//   timestamp  key = microseconds since 1970-01-01T00:00:00Z     text "2026-03-31T14:30:00Z",
//              (a UTC offset is applied: "...T16:30:00+02:00" is the same instant and the same key;
//               fractional seconds to microseconds; the canonical text is UTC with "Z", and shows
//               fractional digits only when they are not zero, trailing zeros trimmed: ".5")
// Calendar: proleptic Gregorian, years 0001..9999 (the UTC instant of a timestamp too).
// One series holds one kind; the store refuses a period of another kind for it (error
// period_kind). The canonical text is the label the engine sees, so replay and live agree.
//
// Thread safety: pure functions on values.
#pragma once

#include <cstdint>
#include <string>
#include <string_view>

#include "rimwatch/engine/status.h"

namespace rimwatch::daemon {

enum class PeriodKind { kInteger = 0, kDate = 1, kTimestamp = 2 };

// "integer", "date", "timestamp" (stable; stored in the series table and used in messages).
std::string_view PeriodKindName(PeriodKind kind);
// Inverse of PeriodKindName; false for any other text.
bool PeriodKindFromName(std::string_view name, PeriodKind* out);

struct Period {
  PeriodKind kind = PeriodKind::kInteger;
  std::int64_t key = 0;
  std::string text;  // canonical text (see above)
};

inline bool operator==(const Period& a, const Period& b) {
  return a.kind == b.kind && a.key == b.key;
}

// An integer period.
Period IntegerPeriod(std::int64_t value);

// Parses "-?[0-9]+" as an integer (64-bit; leading zeros allowed, the canonical text drops them),
// "YYYY-MM-DD" as a date, "YYYY-MM-DDTHH:MM[:SS[.f+]](Z|+hh:mm|-hh:mm)" as a timestamp (a
// timestamp without a zone is refused: the instant would depend on the reader; digits finer than
// a microsecond must be zeros; seconds 60 and hour 24 are refused).
// Errors are kInvalidArgument naming the text and the rule ("period \"2026-02-30\": day 30 is
// outside February 2026").
Status ParsePeriod(std::string_view text, Period* out);

// Canonical text of a key of the given kind (the inverse of ParsePeriod on canonical text).
// A date or timestamp key outside years 0001..9999 (ParsePeriod never makes one) is written
// "date:<key>" / "timestamp:<key>", which ParsePeriod refuses.
std::string FormatPeriod(PeriodKind kind, std::int64_t key);

}  // namespace rimwatch::daemon
