// Reading the files written by tests/reference/make_reference.py (see tests/data/README.md).
//
// ReferenceDir() resolves RIMWATCH_REFERENCE_DIR (set by CTest from the reference_data fixture).
// ReadReferenceCsv() reads "<dir>/<case>.csv": header "period,<var1>,...", then one row per
// observation, values printed with %.17g so std::strtod reads them back exactly.
// Both return false and say why in *why; callers turn that into a test failure, never a skip.
#pragma once

#include <Eigen/Core>
#include <cstdlib>
#include <filesystem>
#include <fstream>
#include <sstream>
#include <string>
#include <vector>

namespace rimwatch::refdata {

struct ReferenceCsv {
  std::vector<std::string> variables;  // header after "period"
  std::vector<std::string> periods;    // first column, as text
  Eigen::MatrixXd values;              // rows x n, oldest first
};

inline bool ReferenceDir(std::string* dir, std::string* why) {
  const char* env = std::getenv("RIMWATCH_REFERENCE_DIR");
  if (env == nullptr || *env == '\0') {
    *why = "RIMWATCH_REFERENCE_DIR is not set (run through ctest, fixture reference_data)";
    return false;
  }
  if (!std::filesystem::is_directory(env)) {
    *why = std::string("RIMWATCH_REFERENCE_DIR = '") + env + "' is not a directory";
    return false;
  }
  *dir = env;
  return true;
}

inline std::vector<std::string> SplitCsvLine(const std::string& line) {
  std::vector<std::string> cells;
  std::stringstream in(line);
  std::string cell;
  while (std::getline(in, cell, ',')) cells.push_back(cell);
  if (!line.empty() && line.back() == ',') cells.emplace_back();
  return cells;
}

// Parses the whole cell as one double; false on trailing text or an empty cell.
inline bool ParseCell(const std::string& cell, double* out) {
  if (cell.empty()) return false;
  char* end = nullptr;
  *out = std::strtod(cell.c_str(), &end);
  return end == cell.c_str() + cell.size();
}

inline bool ReadReferenceCsv(const std::string& path, ReferenceCsv* out, std::string* why) {
  std::ifstream in(path);
  if (!in) {
    *why = "cannot open " + path;
    return false;
  }
  std::string line;
  if (!std::getline(in, line)) {
    *why = path + ": empty file";
    return false;
  }
  std::vector<std::string> header = SplitCsvLine(line);
  if (header.size() < 2 || header[0] != "period") {
    *why = path + ": header must be 'period,<var1>,...'";
    return false;
  }
  out->variables.assign(header.begin() + 1, header.end());
  const std::size_t n = out->variables.size();
  std::vector<std::vector<double>> rows;
  out->periods.clear();
  for (int line_no = 2; std::getline(in, line); ++line_no) {
    if (line.empty()) continue;
    const std::vector<std::string> cells = SplitCsvLine(line);
    if (cells.size() != n + 1) {
      *why = path + ":" + std::to_string(line_no) + ": expected " + std::to_string(n + 1) +
             " cells, got " + std::to_string(cells.size());
      return false;
    }
    std::vector<double> row(n);
    for (std::size_t j = 0; j < n; ++j) {
      if (!ParseCell(cells[j + 1], &row[j])) {
        *why = path + ":" + std::to_string(line_no) + ": '" + cells[j + 1] + "' is not a number";
        return false;
      }
    }
    out->periods.push_back(cells[0]);
    rows.push_back(std::move(row));
  }
  out->values.resize(static_cast<Eigen::Index>(rows.size()), static_cast<Eigen::Index>(n));
  for (std::size_t i = 0; i < rows.size(); ++i) {
    for (std::size_t j = 0; j < n; ++j) {
      out->values(static_cast<Eigen::Index>(i), static_cast<Eigen::Index>(j)) = rows[i][j];
    }
  }
  return true;
}

}  // namespace rimwatch::refdata
