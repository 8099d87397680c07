// Period labels: integer, date and timestamp parsing, canonical text, keys, and every rule a bad
// label breaks. Day numbers and instants are checked against Python's standard library datetime
// (proleptic Gregorian calendar, date.toordinal / datetime with tzinfo), run with /usr/bin/python3.
#include "rimwatch/daemon/period.h"

#include <gtest/gtest.h>

#include <algorithm>
#include <fstream>
#include <random>
#include <sstream>

#include "store_python.h"

namespace rimwatch::daemon {
namespace {

Period Parse(const std::string& text) {
  Period p;
  const Status st = ParsePeriod(text, &p);
  EXPECT_TRUE(st.ok()) << text << ": " << st.ToString();
  return p;
}

std::string Refusal(const std::string& text) {
  Period p;
  const Status st = ParsePeriod(text, &p);
  EXPECT_EQ(st.code(), StatusCode::kInvalidArgument) << text;
  return st.message();
}

constexpr std::int64_t kDay = 86400000000;  // microseconds

TEST(PeriodTest, KindNamesRoundTrip) {
  for (PeriodKind k : {PeriodKind::kInteger, PeriodKind::kDate, PeriodKind::kTimestamp}) {
    PeriodKind back = PeriodKind::kInteger;
    ASSERT_TRUE(PeriodKindFromName(PeriodKindName(k), &back));
    EXPECT_EQ(back, k);
  }
  EXPECT_EQ(PeriodKindName(PeriodKind::kDate), "date");
  PeriodKind k;
  EXPECT_FALSE(PeriodKindFromName("Date", &k));
  EXPECT_FALSE(PeriodKindFromName("", &k));
}

TEST(PeriodTest, Integers) {
  Period p = Parse("17");
  EXPECT_EQ(p.kind, PeriodKind::kInteger);
  EXPECT_EQ(p.key, 17);
  EXPECT_EQ(p.text, "17");
  EXPECT_EQ(Parse("-3").key, -3);
  EXPECT_EQ(Parse("-3").text, "-3");
  EXPECT_EQ(Parse("007").text, "7");
  EXPECT_EQ(Parse("-0").text, "0");
  EXPECT_EQ(Parse("9223372036854775807").key, INT64_MAX);
  EXPECT_EQ(Parse("-9223372036854775808").key, INT64_MIN);
  EXPECT_NE(Refusal("9223372036854775808").find("64-bit integer range"), std::string::npos);
  EXPECT_NE(Refusal("+5").find("not an integer, a date"), std::string::npos);
  Refusal("1.5");
  Refusal("-");
  Refusal(" 1");
  Refusal("1 ");
  EXPECT_EQ(Refusal(""), "period \"\": empty");
  EXPECT_EQ(IntegerPeriod(-12).text, "-12");
  EXPECT_EQ(IntegerPeriod(-12), Parse("-12"));
  EXPECT_EQ(FormatPeriod(PeriodKind::kInteger, -12), "-12");
}

TEST(PeriodTest, Dates) {
  Period p = Parse("1970-01-01");
  EXPECT_EQ(p.kind, PeriodKind::kDate);
  EXPECT_EQ(p.key, 0);
  EXPECT_EQ(Parse("1970-01-02").key, 1);
  EXPECT_EQ(Parse("1969-12-31").key, -1);
  // 2000-01-01 is day 10957 of the Unix epoch (common practice: 30 years, 7 of them leap).
  EXPECT_EQ(Parse("2000-01-01").key, 30 * 365 + 7);
  EXPECT_EQ(Parse("2026-03-31").text, "2026-03-31");
  EXPECT_EQ(Refusal("2026-02-30"), "period \"2026-02-30\": day 30 is outside February 2026");
  EXPECT_EQ(Refusal("2026-04-31"), "period \"2026-04-31\": day 31 is outside April 2026");
  EXPECT_EQ(Refusal("2026-01-00"), "period \"2026-01-00\": day 0 is outside January 2026");
  EXPECT_EQ(Refusal("2026-13-01"), "period \"2026-13-01\": month 13 is outside 01..12");
  EXPECT_EQ(Refusal("2026-00-01"), "period \"2026-00-01\": month 0 is outside 01..12");
  EXPECT_EQ(Refusal("0000-06-01"), "period \"0000-06-01\": year 0 is outside 0001..9999");
  // Leap years: divisible by 4, except centuries, except centuries divisible by 400.
  EXPECT_EQ(Parse("2024-02-29").key + 1, Parse("2024-03-01").key);
  EXPECT_EQ(Parse("2000-02-29").key + 1, Parse("2000-03-01").key);
  EXPECT_EQ(Refusal("1900-02-29"), "period \"1900-02-29\": day 29 is outside February 1900");
  Refusal("2023-02-29");
  Refusal("2100-02-29");
  EXPECT_EQ(Parse("2100-03-01").key - Parse("2100-02-28").key, 1);
  Refusal("10000-01-01");
  Refusal("2026-3-31");
  Refusal("2026-03-31 ");
  Refusal("2026/03/31");
  Refusal("2026Q1");
  EXPECT_NE(Refusal("2026-03-31 14:30Z").find("'T'"), std::string::npos);
}

TEST(PeriodTest, Timestamps) {
  const Period p = Parse("2026-03-31T14:30:00Z");
  EXPECT_EQ(p.kind, PeriodKind::kTimestamp);
  EXPECT_EQ(p.key, Parse("2026-03-31").key * kDay + (14 * 60 + 30) * 60000000LL);
  EXPECT_EQ(p.text, "2026-03-31T14:30:00Z");
  EXPECT_EQ(Parse("1970-01-01T00:00:00Z").key, 0);
  EXPECT_EQ(Parse("1969-12-31T23:59:59.999999Z").key, -1);
  EXPECT_EQ(Parse("1969-12-31T23:59:59.999999Z").text, "1969-12-31T23:59:59.999999Z");
  // Offsets: the same instant gives the same key and the same canonical (UTC) text.
  for (const char* same : {"2026-03-31T16:30:00+02:00", "2026-03-31T14:30Z",
                           "2026-03-31T09:00:00-05:30", "2026-03-31T14:30:00.000000Z",
                           "2026-03-31T14:30:00.000000000Z", "2026-03-31T14:30:00-00:00"}) {
    const Period q = Parse(same);
    EXPECT_EQ(q, p) << same;
    EXPECT_EQ(q.text, p.text) << same;
  }
  // Offsets that cross a day, a month and a year boundary.
  EXPECT_EQ(Parse("2026-01-01T01:00:00+02:00").text, "2025-12-31T23:00:00Z");
  EXPECT_EQ(Parse("2024-02-28T22:00:00-03:00").text, "2024-02-29T01:00:00Z");
  EXPECT_EQ(Parse("2023-02-28T22:00:00-03:00").text, "2023-03-01T01:00:00Z");
  // Fractions: to the microsecond, trailing zeros trimmed in the canonical text.
  EXPECT_EQ(Parse("2026-03-31T14:30:00.5Z").text, "2026-03-31T14:30:00.5Z");
  EXPECT_EQ(Parse("2026-03-31T14:30:00.500Z").text, "2026-03-31T14:30:00.5Z");
  EXPECT_EQ(Parse("2026-03-31T14:30:00.000123Z").text, "2026-03-31T14:30:00.000123Z");
  EXPECT_EQ(Parse("2026-03-31T14:30:00.5Z").key, p.key + 500000);
  EXPECT_EQ(Parse("2026-03-31T14:30:00.1234560Z").key, p.key + 123456);
  EXPECT_NE(Refusal("2026-03-31T14:30:00.1234567Z").find("finer than a microsecond"),
            std::string::npos);
  EXPECT_NE(Refusal("2026-03-31T14:30:00.Z").find("at least one digit"), std::string::npos);
  // Ranges of the fields.
  EXPECT_EQ(Refusal("2026-03-31T24:00:00Z"),
            "period \"2026-03-31T24:00:00Z\": hour 24 is outside 00..23");
  EXPECT_NE(Refusal("2026-03-31T14:60Z").find("minute 60"), std::string::npos);
  EXPECT_NE(Refusal("2026-03-31T23:59:60Z").find("leap seconds"), std::string::npos);
  EXPECT_NE(Refusal("2026-03-31T14:30+24:00").find("offset hour 24"), std::string::npos);
  EXPECT_NE(Refusal("2026-03-31T14:30+02:60").find("offset minute 60"), std::string::npos);
  EXPECT_NE(Refusal("2026-02-30T14:30Z").find("day 30 is outside February 2026"),
            std::string::npos);
  // A zone is required, in one of the two forms.
  EXPECT_NE(Refusal("2026-03-31T14:30:00").find("needs its UTC offset"), std::string::npos);
  Refusal("2026-03-31T14:30");
  Refusal("2026-03-31T14:30:00z");
  Refusal("2026-03-31T14:30:00+0200");
  Refusal("2026-03-31T14:30:00+02");
  Refusal("2026-03-31t14:30:00Z");
  Refusal("2026-03-31T14");
  Refusal("2026-03-31T14:3Z");
  Refusal("2026-03-31T14:30:5Z");
  EXPECT_NE(Refusal("2026-03-31T14:30:00Zx").find("unexpected text after the zone"),
            std::string::npos);
  // The instant in UTC must stay inside years 0001..9999.
  EXPECT_EQ(Parse("0001-01-01T00:00:00Z").text, "0001-01-01T00:00:00Z");
  EXPECT_EQ(Parse("9999-12-31T23:59:59.999999Z").text, "9999-12-31T23:59:59.999999Z");
  EXPECT_NE(Refusal("0001-01-01T00:30:00+01:00").find("outside 0001-01-01"), std::string::npos);
  Refusal("9999-12-31T23:30:00-01:00");
}

TEST(PeriodTest, KindsAreDistinctAndKeysOrderChronologically) {
  EXPECT_FALSE(Parse("0") == Parse("1970-01-01"));  // same key, different kinds
  std::mt19937_64 gen(5);
  std::uniform_int_distribution<std::int64_t> key(Parse("0001-01-01T00:00:00Z").key,
                                                  Parse("9999-12-31T23:59:59.999999Z").key);
  std::vector<std::int64_t> keys(2000);
  for (auto& k : keys) k = key(gen);
  std::sort(keys.begin(), keys.end());
  std::string previous;
  for (std::int64_t k : keys) {
    const std::string text = FormatPeriod(PeriodKind::kTimestamp, k);
    const Period back = Parse(text);
    EXPECT_EQ(back.key, k) << text;
    EXPECT_EQ(back.text, text);
    // Seconds-resolution prefixes are fixed width, so they sort like the keys.
    const std::string prefix = text.substr(0, 19);
    EXPECT_LE(previous, prefix);
    previous = prefix;
  }
}

// Every day of 0001-01-01..9999-12-31: the canonical text parses back to its key, and the next
// key is the next calendar day (day + 1, or the first of the next month or year).
TEST(PeriodTest, EveryDayRoundTripsAndFollowsTheCalendar) {
  const std::int64_t first = Parse("0001-01-01").key, last = Parse("9999-12-31").key;
  EXPECT_EQ(last - first + 1, 3652059);  // 9999 years, 2424 of them leap (common practice)
  int y = 1, m = 1, d = 1;
  for (std::int64_t k = first; k <= last; ++k) {
    const std::string text = FormatPeriod(PeriodKind::kDate, k);
    char expect[40];
    std::snprintf(expect, sizeof expect, "%04d-%02d-%02d", y, m, d);
    ASSERT_EQ(text, expect) << "key " << k;
    Period back;
    ASSERT_TRUE(ParsePeriod(text, &back).ok()) << text;
    ASSERT_EQ(back.key, k) << text;
    const bool leap = (y % 4 == 0 && y % 100 != 0) || y % 400 == 0;
    const int month_days[] = {31, leap ? 29 : 28, 31, 30, 31, 30, 31, 31, 30, 31, 30, 31};
    if (++d > month_days[m - 1]) {
      d = 1;
      if (++m > 12) {
        m = 1;
        ++y;
      }
    }
  }
  EXPECT_EQ(y, 10000);
  EXPECT_EQ(FormatPeriod(PeriodKind::kDate, first - 1), "date:" + std::to_string(first - 1));
  EXPECT_EQ(FormatPeriod(PeriodKind::kDate, last + 1), "date:" + std::to_string(last + 1));
  EXPECT_EQ(FormatPeriod(PeriodKind::kTimestamp, (last + 1) * kDay),
            "timestamp:" + std::to_string((last + 1) * kDay));
  Refusal(FormatPeriod(PeriodKind::kDate, last + 1));
}

// Reference: Python's standard library datetime (proleptic Gregorian calendar). For each
// candidate date, Python says whether it exists (date(y, m, d) raises ValueError if not) and
// gives date.toordinal() - date(1970, 1, 1).toordinal(); for each timestamp with an offset, the
// microseconds from the Unix epoch of the aware datetime and its UTC fields.
constexpr const char* kPythonReference = R"py(
import sys
from datetime import date, datetime, timedelta, timezone

epoch_days = date(1970, 1, 1).toordinal()
epoch = datetime(1970, 1, 1, tzinfo=timezone.utc)
with open(sys.argv[1]) as f, open(sys.argv[2], "w") as out:
    for line in f:
        kind, *fields = line.split()
        if kind == "date":
            y, m, d = map(int, fields)
            try:
                out.write("%d\n" % (date(y, m, d).toordinal() - epoch_days))
            except ValueError:
                out.write("invalid\n")
        else:
            y, m, d, hh, mm, ss, us, off_min = map(int, fields)
            tz = timezone(timedelta(minutes=off_min))
            t = datetime(y, m, d, hh, mm, ss, us, tzinfo=tz)
            u = t.astimezone(timezone.utc)
            text = "%04d-%02d-%02dT%02d:%02d:%02d" % (u.year, u.month, u.day, u.hour, u.minute,
                                                       u.second)
            if u.microsecond:
                text += ("." + "%06d" % u.microsecond).rstrip("0")
            out.write("%d %sZ\n" % ((t - epoch) // timedelta(microseconds=1), text))
)py";

struct DateCase {
  int y, m, d;
};
struct InstantCase {
  int y, m, d, hh, mm, ss, us, offset_minutes;
  std::string text;  // as given to ParsePeriod
};

std::vector<DateCase> ReferenceDates() {
  std::vector<DateCase> out;
  // Whole years around the leap-rule edges (century, 400-year), the epoch and the range ends;
  // days 29..31 of every month make the refused dates part of the comparison.
  for (int y0 : {1, 96, 396, 1582, 1896, 1968, 1996, 2096, 2396, 9996}) {
    for (int y = y0; y < y0 + 8 && y <= 9999; ++y) {
      for (int m = 1; m <= 12; ++m) {
        for (int d = 1; d <= 31; ++d) out.push_back({y, m, d});
      }
    }
  }
  std::mt19937_64 gen(11);
  std::uniform_int_distribution<int> year(1, 9999), month(1, 12), day(1, 31);
  for (int i = 0; i < 5000; ++i) out.push_back({year(gen), month(gen), day(gen)});
  return out;
}

std::vector<InstantCase> ReferenceInstants() {
  std::vector<InstantCase> out;
  std::mt19937_64 gen(12);
  std::uniform_int_distribution<int> year(2, 9998), month(1, 12), day(1, 28), hour(0, 23),
      minute(0, 59), second(0, 59), micro(0, 999999), offset(-23 * 60 - 59, 23 * 60 + 59),
      style(0, 3);
  for (int i = 0; i < 3000; ++i) {
    InstantCase c{year(gen),   month(gen), day(gen),    hour(gen), minute(gen),
                  second(gen), micro(gen), offset(gen), ""};
    if (i % 4 == 0) c.us = 0;
    if (i % 5 == 0) c.us = c.us / 1000 * 1000;
    if (i % 7 == 0) c.offset_minutes = 0;
    if (i < 40) {  // near midnight of a year end, so the offset moves the year
      c.m = 12;
      c.d = 31;
      c.hh = 23;
      c.y = i < 20 ? 9998 : 2000 + i;
    }
    char buf[64];
    const int a = std::abs(c.offset_minutes);
    char zone[16];
    if (c.offset_minutes == 0 && style(gen) == 0) {
      std::snprintf(zone, sizeof zone, "Z");
    } else {
      std::snprintf(zone, sizeof zone, "%c%02d:%02d", c.offset_minutes < 0 ? '-' : '+', a / 60,
                    a % 60);
    }
    std::snprintf(buf, sizeof buf, "%04d-%02d-%02dT%02d:%02d:%02d.%06d%s", c.y, c.m, c.d, c.hh,
                  c.mm, c.ss, c.us, zone);
    c.text = buf;
    out.push_back(c);
  }
  return out;
}

TEST(PeriodTest, DayNumbersAndInstantsEqualPythonDatetime) {
  const std::vector<DateCase> dates = ReferenceDates();
  const std::vector<InstantCase> instants = ReferenceInstants();
  const std::string dir = ::testing::TempDir();
  const std::string in_path = testing::TempPath(dir, "period_ref_in.");
  const std::string out_path = testing::TempPath(dir, "period_ref_out.");
  {
    std::ofstream in(in_path);
    for (const DateCase& c : dates) in << "date " << c.y << " " << c.m << " " << c.d << "\n";
    for (const InstantCase& c : instants) {
      in << "instant " << c.y << " " << c.m << " " << c.d << " " << c.hh << " " << c.mm << " "
         << c.ss << " " << c.us << " " << c.offset_minutes << "\n";
    }
  }
  const testing::ProcessResult r = testing::RunPython(kPythonReference, {in_path, out_path}, dir);
  ASSERT_EQ(r.exit_code, 0) << "/usr/bin/python3 failed: " << r.err;
  std::ifstream ref(out_path);
  int valid = 0, invalid = 0;
  for (const DateCase& c : dates) {
    std::string expect;
    ASSERT_TRUE(ref >> expect);
    char text[40];
    std::snprintf(text, sizeof text, "%04d-%02d-%02d", c.y, c.m, c.d);
    Period p;
    const Status st = ParsePeriod(text, &p);
    if (expect == "invalid") {
      EXPECT_EQ(st.code(), StatusCode::kInvalidArgument) << text;
      ++invalid;
    } else {
      ASSERT_TRUE(st.ok()) << text << ": " << st.ToString();
      EXPECT_EQ(std::to_string(p.key), expect) << text;
      EXPECT_EQ(p.text, text);
      ++valid;
    }
  }
  for (const InstantCase& c : instants) {
    std::string key, text;
    ASSERT_TRUE(ref >> key >> text);
    const Period p = Parse(c.text);
    EXPECT_EQ(std::to_string(p.key), key) << c.text;
    EXPECT_EQ(p.text, text) << c.text;
  }
  std::string extra;
  EXPECT_FALSE(ref >> extra);
  EXPECT_GT(valid, 20000);
  EXPECT_GT(invalid, 500);
  std::remove(in_path.c_str());
  std::remove(out_path.c_str());
}

}  // namespace
}  // namespace rimwatch::daemon
