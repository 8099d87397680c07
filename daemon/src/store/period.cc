// Period labels: parsing, canonical text and the day arithmetic behind date and timestamp keys.
//
// Calendar: proleptic Gregorian (the Gregorian leap rule applied to every year), years 0001..9999
// as in ISO 8601 without expansion. Day numbers are counted from 1970-01-01 = 0.
// Civil date <-> day number uses the 400-year era decomposition with years starting on 1 March
// (so the leap day is the last day of its year): H. Hinnant, "chrono-Compatible Low-Level Date
// Algorithms" (2013), days_from_civil / civil_from_days. Checked against Python's datetime in
// tests/daemon/period_test.cc.
#include "rimwatch/daemon/period.h"

#include <charconv>
#include <cstdio>

namespace rimwatch::daemon {
namespace {

constexpr std::int64_t kMicrosPerSecond = 1000000;
constexpr std::int64_t kMicrosPerDay = 86400 * kMicrosPerSecond;
constexpr int kMinYear = 1;
constexpr int kMaxYear = 9999;

constexpr const char* kMonthNames[12] = {"January",   "February", "March",    "April",
                                         "May",       "June",     "July",     "August",
                                         "September", "October",  "November", "December"};

bool IsLeapYear(std::int64_t y) { return (y % 4 == 0 && y % 100 != 0) || y % 400 == 0; }

int DaysInMonth(std::int64_t y, int m) {
  static constexpr int kDays[12] = {31, 28, 31, 30, 31, 30, 31, 31, 30, 31, 30, 31};
  return m == 2 && IsLeapYear(y) ? 29 : kDays[m - 1];
}

// Floor division for a positive divisor (C++ '/' truncates toward zero).
std::int64_t FloorDiv(std::int64_t a, std::int64_t b) { return a / b - (a % b != 0 && a < 0); }

// Days since 1970-01-01 of y-m-d (m 1..12, d 1..31, valid for the month). An era is 400 years =
// 146097 days; inside it, years run March..February so the leap day falls at the end.
std::int64_t DaysFromCivil(std::int64_t y, int m, int d) {
  y -= m <= 2 ? 1 : 0;
  const std::int64_t era = FloorDiv(y, 400);
  const std::int64_t year_of_era = y - era * 400;                             // [0, 399]
  const int month_from_march = m > 2 ? m - 3 : m + 9;                         // [0, 11]
  const std::int64_t day_of_year = (153 * month_from_march + 2) / 5 + d - 1;  // [0, 365]
  const std::int64_t day_of_era =
      year_of_era * 365 + year_of_era / 4 - year_of_era / 100 + day_of_year;  // [0, 146096]
  return era * 146097 + day_of_era - 719468;  // 719468 = days from 0000-03-01 to 1970-01-01
}

struct Civil {
  std::int64_t year;
  int month;
  int day;
};

// Inverse of DaysFromCivil. REQUIRES |days| well inside the int64 range (callers bound it).
Civil CivilFromDays(std::int64_t days) {
  const std::int64_t z = days + 719468;
  const std::int64_t era = FloorDiv(z, 146097);
  const std::int64_t day_of_era = z - era * 146097;  // [0, 146096]
  const std::int64_t year_of_era =
      (day_of_era - day_of_era / 1460 + day_of_era / 36524 - day_of_era / 146096) / 365;
  const std::int64_t day_of_year =
      day_of_era - (365 * year_of_era + year_of_era / 4 - year_of_era / 100);  // [0, 365]
  const int month_from_march = static_cast<int>((5 * day_of_year + 2) / 153);  // [0, 11]
  const int day = static_cast<int>(day_of_year - (153 * month_from_march + 2) / 5 + 1);
  const int month = month_from_march < 10 ? month_from_march + 3 : month_from_march - 9;
  return Civil{year_of_era + era * 400 + (month <= 2 ? 1 : 0), month, day};
}

const std::int64_t kMinDays = DaysFromCivil(kMinYear, 1, 1);
const std::int64_t kMaxDays = DaysFromCivil(kMaxYear, 12, 31);

// A cursor over the text with the error wording of ParsePeriod.
class Scanner {
 public:
  explicit Scanner(std::string_view text) : text_(text) {}

  bool AtEnd() const { return pos_ == text_.size(); }
  char Peek() const { return AtEnd() ? '\0' : text_[pos_]; }
  std::size_t pos() const { return pos_; }

  // Exactly `width` decimal digits.
  bool Digits(int width, int* out) {
    if (pos_ + static_cast<std::size_t>(width) > text_.size()) return false;
    int v = 0;
    for (int i = 0; i < width; ++i) {
      const char c = text_[pos_ + static_cast<std::size_t>(i)];
      if (c < '0' || c > '9') return false;
      v = v * 10 + (c - '0');
    }
    pos_ += static_cast<std::size_t>(width);
    *out = v;
    return true;
  }
  bool Literal(char c) {
    if (Peek() != c || AtEnd()) return false;
    ++pos_;
    return true;
  }

 private:
  std::string_view text_;
  std::size_t pos_ = 0;
};

Status Refuse(std::string_view text, const std::string& why) {
  std::string msg = "period \"";
  msg.append(text);
  msg += "\": ";
  msg += why;
  return Status::InvalidArgument(std::move(msg));
}

bool LooksLikeInteger(std::string_view text) {
  std::size_t i = text.empty() || text[0] != '-' ? 0 : 1;
  if (i == text.size()) return false;
  for (; i < text.size(); ++i) {
    if (text[i] < '0' || text[i] > '9') return false;
  }
  return true;
}

Status ParseInteger(std::string_view text, Period* out) {
  std::int64_t v = 0;
  const auto [end, ec] = std::from_chars(text.data(), text.data() + text.size(), v);
  if (ec == std::errc::result_out_of_range) {
    return Refuse(text, "outside the 64-bit integer range");
  }
  if (ec != std::errc() || end != text.data() + text.size()) {
    return Refuse(text, "not an integer");
  }
  *out = IntegerPeriod(v);
  return Status::Ok();
}

// "YYYY-MM-DD" at the scanner; *days = day number.
Status ParseDatePart(std::string_view text, Scanner& s, std::int64_t* days) {
  int y = 0, m = 0, d = 0;
  if (!s.Digits(4, &y) || !s.Literal('-') || !s.Digits(2, &m) || !s.Literal('-') ||
      !s.Digits(2, &d)) {
    return Refuse(text,
                  "not an integer, a date YYYY-MM-DD or a timestamp "
                  "YYYY-MM-DDTHH:MM[:SS[.ffffff]] with Z or +hh:mm / -hh:mm");
  }
  if (y < kMinYear || y > kMaxYear) {
    return Refuse(text, "year " + std::to_string(y) + " is outside 0001..9999");
  }
  if (m < 1 || m > 12) return Refuse(text, "month " + std::to_string(m) + " is outside 01..12");
  if (d < 1 || d > DaysInMonth(y, m)) {
    return Refuse(text, "day " + std::to_string(d) + " is outside " + kMonthNames[m - 1] + " " +
                            std::to_string(y));
  }
  *days = DaysFromCivil(y, m, d);
  return Status::Ok();
}

// "HH:MM[:SS[.f+]]" at the scanner; *micros = microseconds since midnight.
Status ParseTimePart(std::string_view text, Scanner& s, std::int64_t* micros) {
  int hh = 0, mm = 0, ss = 0;
  if (!s.Digits(2, &hh) || !s.Literal(':') || !s.Digits(2, &mm)) {
    return Refuse(text, "the time after 'T' must be HH:MM[:SS[.ffffff]]");
  }
  if (s.Literal(':') && !s.Digits(2, &ss)) {
    return Refuse(text, "the seconds after HH:MM: must be two digits");
  }
  if (hh > 23) return Refuse(text, "hour " + std::to_string(hh) + " is outside 00..23");
  if (mm > 59) return Refuse(text, "minute " + std::to_string(mm) + " is outside 00..59");
  if (ss > 59) {
    return Refuse(text, "second " + std::to_string(ss) +
                            " is outside 00..59 (leap seconds are not represented)");
  }
  std::int64_t fraction = 0;
  if (s.Peek() == '.') {
    s.Literal('.');
    int digits = 0;
    while (s.Peek() >= '0' && s.Peek() <= '9') {
      int digit = 0;
      s.Digits(1, &digit);
      if (digits < 6) {
        fraction = fraction * 10 + digit;
      } else if (digit != 0) {
        return Refuse(text, "fractional seconds finer than a microsecond are not represented");
      }
      ++digits;
    }
    if (digits == 0) return Refuse(text, "a '.' after the seconds needs at least one digit");
    for (int i = digits; i < 6; ++i) fraction *= 10;
  }
  *micros = ((hh * 60 + mm) * 60 + ss) * kMicrosPerSecond + fraction;
  return Status::Ok();
}

// "Z" or "+hh:mm" / "-hh:mm" at the scanner; *offset = the zone's offset from UTC in microseconds.
Status ParseZone(std::string_view text, Scanner& s, std::int64_t* offset) {
  if (s.AtEnd()) {
    return Refuse(text,
                  "a timestamp needs its UTC offset (Z or +hh:mm / -hh:mm): without it the "
                  "instant depends on the reader's time zone");
  }
  if (s.Literal('Z')) {
    *offset = 0;
    return Status::Ok();
  }
  const char sign = s.Peek();
  int hh = 0, mm = 0;
  if ((sign != '+' && sign != '-') || !s.Literal(sign) || !s.Digits(2, &hh) || !s.Literal(':') ||
      !s.Digits(2, &mm)) {
    return Refuse(text, "the zone must be Z or +hh:mm / -hh:mm");
  }
  if (hh > 23) return Refuse(text, "offset hour " + std::to_string(hh) + " is outside 00..23");
  if (mm > 59) return Refuse(text, "offset minute " + std::to_string(mm) + " is outside 00..59");
  const std::int64_t v = (hh * 60 + mm) * 60 * kMicrosPerSecond;
  *offset = sign == '+' ? v : -v;
  return Status::Ok();
}

void AppendPadded(std::string* out, std::int64_t v, int width) {
  char buf[24];
  std::snprintf(buf, sizeof buf, "%0*lld", width, static_cast<long long>(v));
  out->append(buf);
}

std::string FormatDays(std::int64_t days) {
  const Civil c = CivilFromDays(days);
  std::string out;
  out.reserve(32);
  AppendPadded(&out, c.year, 4);
  out += '-';
  AppendPadded(&out, c.month, 2);
  out += '-';
  AppendPadded(&out, c.day, 2);
  return out;
}

}  // namespace

std::string_view PeriodKindName(PeriodKind kind) {
  switch (kind) {
    case PeriodKind::kInteger:
      return "integer";
    case PeriodKind::kDate:
      return "date";
    case PeriodKind::kTimestamp:
      return "timestamp";
  }
  return "unknown";
}

bool PeriodKindFromName(std::string_view name, PeriodKind* out) {
  for (PeriodKind k : {PeriodKind::kInteger, PeriodKind::kDate, PeriodKind::kTimestamp}) {
    if (name == PeriodKindName(k)) {
      *out = k;
      return true;
    }
  }
  return false;
}

Period IntegerPeriod(std::int64_t value) {
  return Period{PeriodKind::kInteger, value, std::to_string(value)};
}

Status ParsePeriod(std::string_view text, Period* out) {
  if (text.empty()) return Refuse(text, "empty");
  if (LooksLikeInteger(text)) return ParseInteger(text, out);
  Scanner s(text);
  std::int64_t days = 0;
  Status st = ParseDatePart(text, s, &days);
  if (!st.ok()) return st;
  if (s.AtEnd()) {
    *out = Period{PeriodKind::kDate, days, FormatPeriod(PeriodKind::kDate, days)};
    return Status::Ok();
  }
  if (!s.Literal('T')) {
    return Refuse(text, "a date is YYYY-MM-DD; a timestamp continues with 'T' and HH:MM");
  }
  std::int64_t time_of_day = 0, offset = 0;
  st = ParseTimePart(text, s, &time_of_day);
  if (!st.ok()) return st;
  st = ParseZone(text, s, &offset);
  if (!st.ok()) return st;
  if (!s.AtEnd()) {
    return Refuse(text,
                  "unexpected text after the zone: \"" + std::string(text.substr(s.pos())) + "\"");
  }
  const std::int64_t key = days * kMicrosPerDay + time_of_day - offset;
  if (key < kMinDays * kMicrosPerDay || key >= (kMaxDays + 1) * kMicrosPerDay) {
    return Refuse(text,
                  "the instant in UTC is outside 0001-01-01T00:00:00Z..9999-12-31T23:59:59."
                  "999999Z");
  }
  *out = Period{PeriodKind::kTimestamp, key, FormatPeriod(PeriodKind::kTimestamp, key)};
  return Status::Ok();
}

std::string FormatPeriod(PeriodKind kind, std::int64_t key) {
  switch (kind) {
    case PeriodKind::kInteger:
      return std::to_string(key);
    case PeriodKind::kDate:
      if (key < kMinDays || key > kMaxDays) return "date:" + std::to_string(key);
      return FormatDays(key);
    case PeriodKind::kTimestamp: {
      if (key < kMinDays * kMicrosPerDay || key >= (kMaxDays + 1) * kMicrosPerDay) {
        return "timestamp:" + std::to_string(key);
      }
      const std::int64_t days = FloorDiv(key, kMicrosPerDay);
      std::int64_t rest = key - days * kMicrosPerDay;  // [0, kMicrosPerDay)
      const std::int64_t micros = rest % kMicrosPerSecond;
      rest /= kMicrosPerSecond;
      std::string out = FormatDays(days);
      out += 'T';
      AppendPadded(&out, rest / 3600, 2);
      out += ':';
      AppendPadded(&out, rest / 60 % 60, 2);
      out += ':';
      AppendPadded(&out, rest % 60, 2);
      if (micros != 0) {
        std::string frac;
        AppendPadded(&frac, micros, 6);
        while (frac.back() == '0') frac.pop_back();
        out += '.';
        out += frac;
      }
      out += 'Z';
      return out;
    }
  }
  return std::to_string(key);
}

}  // namespace rimwatch::daemon
