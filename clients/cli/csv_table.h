// CsvTable: a numeric table read from a small, strict CSV dialect, for `rimwatch fit` and
// `rimwatch replay`.
//
// Dialect (everything else is refused with FILE:LINE and the reason):
//   * Fields are separated by ','; spaces and tabs around a field are ignored; "\r\n" line ends
//     are accepted; a UTF-8 byte-order mark at the start of the file is skipped.
//   * A line whose first non-blank character is '#' is a comment, anywhere in the file.
//   * The first non-comment line is the header: unique, non-empty variable names. An optional
//     first column named exactly `period` holds a row label kept as text (an integer bar number,
//     a date, a quarter label); it must be non-empty on every row.
//   * Every other line is one observation with exactly one field per header column; values are
//     finite decimal numbers ("1.5", "-2e-3", "+0.25"); NaN, Inf, hex and out-of-range numbers
//     are refused.
//   * Blank lines are allowed only after the last observation.
//   * No quoting: a '"' anywhere is refused, so a quoted field never goes unnoticed.
//
// Thread safety: the functions are reentrant; a CsvTable is a plain value.
#pragma once

#include <cstddef>
#include <string>
#include <string_view>
#include <vector>

namespace rimwatch {

// Where and why reading failed. ToString() gives "FILE:LINE: what" (or "FILE: what" when the
// problem is not tied to a line, e.g. the file cannot be opened).
struct CsvError {
  std::string path;
  int line = 0;  // 1-based physical line; 0 = not tied to a line
  std::string what;

  std::string ToString() const;
};

struct CsvTable {
  std::string path;                  // as given, for messages
  std::vector<std::string> names;    // variable columns in file order (`period` excluded)
  bool has_period = false;           // the first column is `period`
  std::vector<std::string> periods;  // one per row when has_period, else empty
  std::vector<double> values;        // rows() x cols(), row-major, oldest row first
  std::vector<int> lines;            // physical line of each row (for messages)
  int header_line = 0;               // physical line of the header
  int last_line = 0;                 // physical line count of the file

  std::size_t rows() const { return lines.size(); }
  std::size_t cols() const { return names.size(); }
  double value(std::size_t row, std::size_t col) const { return values[row * cols() + col]; }
  // The period label of a row: its `period` text, or the 1-based data row number as text.
  std::string PeriodLabel(std::size_t row) const;
};

// Parse `text` (the whole file) in the dialect above; `path` is used only in messages.
// On failure returns false, fills *error and leaves *out unspecified.
// The dialect's field rules, shared by every CSV reader of the CLI: a line split at ',' (no
// quoting), each field trimmed of spaces and tabs.
std::string_view TrimCsvField(std::string_view s);
std::vector<std::string_view> SplitCsvFields(std::string_view line);

bool ParseCsvTable(std::string_view text, const std::string& path, CsvTable* out, CsvError* error);

// Read and parse the file at `path`. Files larger than kMaxCsvBytes are refused before parsing.
bool ReadCsvTable(const std::string& path, CsvTable* out, CsvError* error);
inline constexpr std::size_t kMaxCsvBytes = std::size_t{1} << 30;  // 1 GiB

}  // namespace rimwatch
