#include "csv_table.h"

#include <cerrno>
#include <charconv>
#include <cmath>
#include <cstring>
#include <filesystem>
#include <fstream>
#include <map>
#include <sstream>
#include <system_error>

namespace rimwatch {

std::string_view TrimCsvField(std::string_view s) {
  const auto first = s.find_first_not_of(" \t");
  if (first == std::string_view::npos) return {};
  const auto last = s.find_last_not_of(" \t");
  return s.substr(first, last - first + 1);
}

std::vector<std::string_view> SplitCsvFields(std::string_view line) {
  std::vector<std::string_view> fields;
  std::size_t start = 0;
  while (true) {
    const std::size_t comma = line.find(',', start);
    fields.push_back(TrimCsvField(line.substr(start, comma - start)));
    if (comma == std::string_view::npos) return fields;
    start = comma + 1;
  }
}

namespace {

constexpr std::string_view kPeriodColumn = "period";
constexpr std::string_view kByteOrderMark = "\xEF\xBB\xBF";

// A finite decimal number: [+-]digits[.digits][(e|E)[+-]digits]. std::from_chars is locale
// independent and correctly rounded; the character filter keeps out "nan", "inf" and hex.
bool ParseNumber(std::string_view field, double* out, std::string* why) {
  if (field.empty()) {
    *why = "empty value";
    return false;
  }
  if (field.find_first_not_of("0123456789.eE+-") != std::string_view::npos) {
    *why = "'" + std::string(field) + "' is not a decimal number";
    return false;
  }
  std::string_view body = field;
  if (body.front() == '+') {
    body.remove_prefix(1);  // from_chars takes a leading '-' but not '+'
    if (body.empty() || body.front() == '+' || body.front() == '-') {
      *why = "'" + std::string(field) + "' is not a decimal number";
      return false;
    }
  }
  double value = 0.0;
  const auto [ptr, ec] = std::from_chars(body.data(), body.data() + body.size(), value);
  if (ec == std::errc::result_out_of_range) {
    *why = "'" + std::string(field) + "' is out of the range of a finite double";
    return false;
  }
  if (ec != std::errc() || ptr != body.data() + body.size() || !std::isfinite(value)) {
    *why = "'" + std::string(field) + "' is not a decimal number";
    return false;
  }
  *out = value;
  return true;
}

bool AllNumbers(const std::vector<std::string_view>& fields) {
  std::string why;
  double v = 0.0;
  for (std::string_view f : fields) {
    if (!ParseNumber(f, &v, &why)) return false;
  }
  return true;
}

// Consumes the file line by line; stops at the first problem.
class CsvParser {
 public:
  CsvParser(const std::string& path, CsvTable* out, CsvError* error) : out_(out), error_(error) {
    *out_ = CsvTable();
    out_->path = path;
    error_->path = path;
  }

  bool Line(int line_no, std::string_view raw);
  bool Finish(int line_count);

 private:
  bool Fail(int line, std::string what) {
    error_->line = line;
    error_->what = std::move(what);
    return false;
  }
  bool Header(int line_no, const std::vector<std::string_view>& fields);
  bool Row(int line_no, const std::vector<std::string_view>& fields);

  CsvTable* out_;
  CsvError* error_;
  bool header_seen_ = false;
  int first_blank_after_data_ = 0;  // a blank line after the header, before more data
};

bool CsvParser::Line(int line_no, std::string_view raw) {
  if (!raw.empty() && raw.back() == '\r') raw.remove_suffix(1);
  if (line_no == 1 && raw.substr(0, kByteOrderMark.size()) == kByteOrderMark) {
    raw.remove_prefix(kByteOrderMark.size());
  }
  const std::string_view text = TrimCsvField(raw);
  if (text.empty()) {
    if (header_seen_ && first_blank_after_data_ == 0) first_blank_after_data_ = line_no;
    return true;
  }
  if (text.front() == '#') return true;
  if (text.find('"') != std::string_view::npos) {
    return Fail(line_no, "quoted fields are not supported (found '\"'); write plain fields");
  }
  if (first_blank_after_data_ != 0) {
    return Fail(first_blank_after_data_,
                "blank line between observations (blank lines are allowed only at the end)");
  }
  const std::vector<std::string_view> fields = SplitCsvFields(text);
  if (!header_seen_) return Header(line_no, fields);
  return Row(line_no, fields);
}

bool CsvParser::Header(int line_no, const std::vector<std::string_view>& fields) {
  if (AllNumbers(fields)) {
    return Fail(line_no,
                "missing header: this line holds numbers, but the first line that is not a "
                "comment must name the columns");
  }
  out_->header_line = line_no;
  out_->has_period = fields.front() == kPeriodColumn;
  std::map<std::string_view, std::size_t> seen;
  for (std::size_t c = 0; c < fields.size(); ++c) {
    const std::string_view name = fields[c];
    const std::string col = "header column " + std::to_string(c + 1);
    if (name.empty()) return Fail(line_no, col + " is empty; every column needs a name");
    if (c == 0 && out_->has_period) continue;
    if (name == kPeriodColumn) {
      return Fail(line_no, col + " is named 'period'; the period column must be the first");
    }
    const auto [it, fresh] = seen.emplace(name, c + 1);
    if (!fresh) {
      return Fail(line_no, "duplicate variable name '" + std::string(name) + "' (columns " +
                               std::to_string(it->second) + " and " + std::to_string(c + 1) + ")");
    }
    out_->names.emplace_back(name);
  }
  if (out_->names.empty()) return Fail(line_no, "the header names no variable columns");
  header_seen_ = true;
  return true;
}

bool CsvParser::Row(int line_no, const std::vector<std::string_view>& fields) {
  const std::size_t expected = out_->names.size() + (out_->has_period ? 1 : 0);
  if (fields.size() != expected) {
    return Fail(line_no, "ragged line: " + std::to_string(fields.size()) +
                             " fields, but the header (line " + std::to_string(out_->header_line) +
                             ") has " + std::to_string(expected));
  }
  std::size_t c = 0;
  if (out_->has_period) {
    if (fields[0].empty()) return Fail(line_no, "empty period label");
    out_->periods.emplace_back(fields[0]);
    c = 1;
  }
  for (std::size_t v = 0; v < out_->names.size(); ++v, ++c) {
    double value = 0.0;
    std::string why;
    if (!ParseNumber(fields[c], &value, &why)) {
      return Fail(line_no, "column '" + out_->names[v] + "': " + why);
    }
    out_->values.push_back(value);
  }
  out_->lines.push_back(line_no);
  return true;
}

bool CsvParser::Finish(int line_count) {
  out_->last_line = line_count;
  const int where = line_count > 0 ? line_count : 1;
  if (!header_seen_) {
    return Fail(where, line_count == 0 ? "empty file: expected a header of variable names"
                                       : "no header: the file holds only comments or blank lines");
  }
  if (out_->rows() == 0) return Fail(where, "no observations after the header");
  return true;
}

}  // namespace

std::string CsvError::ToString() const {
  if (line <= 0) return path + ": " + what;
  return path + ":" + std::to_string(line) + ": " + what;
}

std::string CsvTable::PeriodLabel(std::size_t row) const {
  return has_period ? periods[row] : std::to_string(row + 1);
}

bool ParseCsvTable(std::string_view text, const std::string& path, CsvTable* out, CsvError* error) {
  CsvParser parser(path, out, error);
  int line_no = 0;
  std::size_t start = 0;
  while (start < text.size()) {
    std::size_t end = text.find('\n', start);
    if (end == std::string_view::npos) end = text.size();
    if (!parser.Line(++line_no, text.substr(start, end - start))) return false;
    start = end + 1;
  }
  return parser.Finish(line_no);
}

bool ReadCsvTable(const std::string& path, CsvTable* out, CsvError* error) {
  *error = CsvError{path, 0, ""};
  std::error_code ec;
  const std::filesystem::path fs_path(path);
  if (std::filesystem::is_directory(fs_path, ec)) {
    error->what = "is a directory, not a CSV file";
    return false;
  }
  std::ifstream in(fs_path, std::ios::binary);
  if (!in) {
    error->what = std::string("cannot open for reading (") + std::strerror(errno) + ")";
    return false;
  }
  const auto size = std::filesystem::file_size(fs_path, ec);
  if (!ec && size > kMaxCsvBytes) {
    error->what =
        "file has " + std::to_string(size) + " bytes; the limit is " + std::to_string(kMaxCsvBytes);
    return false;
  }
  std::ostringstream buffer;
  buffer << in.rdbuf();
  if (in.bad()) {
    error->what = "read error";
    return false;
  }
  return ParseCsvTable(buffer.str(), path, out, error);
}

}  // namespace rimwatch
