// Test-only: a fresh directory per test and direct SQLite reads of a store file, through a
// second connection, so tests see what is on disk rather than what the Store reports.
#pragma once

#include <gtest/gtest.h>
#include <sqlite3.h>
#include <stdlib.h>

#include <cstdint>
#include <stdexcept>
#include <string>
#include <vector>

namespace rimwatch::testing {

// A new empty directory under the test temp dir.
inline std::string FreshDir(const std::string& stem) {
  std::string path = ::testing::TempDir() + "/" + stem + ".XXXXXX";
  if (mkdtemp(path.data()) == nullptr) throw std::runtime_error("mkdtemp failed: " + path);
  return path;
}

// Opens `path` with its own connection (read-write, so a test can also tamper with the file).
class SqliteFile {
 public:
  explicit SqliteFile(const std::string& path) {
    if (sqlite3_open_v2(path.c_str(), &db_, SQLITE_OPEN_READWRITE, nullptr) != SQLITE_OK) {
      throw std::runtime_error("cannot open " + path + ": " + sqlite3_errmsg(db_));
    }
  }
  ~SqliteFile() { sqlite3_close(db_); }
  SqliteFile(const SqliteFile&) = delete;
  SqliteFile& operator=(const SqliteFile&) = delete;

  // Every row of a query, each column as text ("NULL" for SQL NULL).
  std::vector<std::vector<std::string>> Rows(const std::string& sql) {
    sqlite3_stmt* s = nullptr;
    if (sqlite3_prepare_v2(db_, sql.c_str(), -1, &s, nullptr) != SQLITE_OK) {
      throw std::runtime_error(sql + ": " + sqlite3_errmsg(db_));
    }
    std::vector<std::vector<std::string>> out;
    int rc = 0;
    while ((rc = sqlite3_step(s)) == SQLITE_ROW) {
      std::vector<std::string> row;
      for (int i = 0; i < sqlite3_column_count(s); ++i) {
        const unsigned char* t = sqlite3_column_text(s, i);
        row.push_back(t == nullptr ? "NULL" : reinterpret_cast<const char*>(t));
      }
      out.push_back(std::move(row));
    }
    sqlite3_finalize(s);
    if (rc != SQLITE_DONE) throw std::runtime_error(sql + ": " + sqlite3_errmsg(db_));
    return out;
  }
  std::int64_t Int(const std::string& sql) {
    const auto rows = Rows(sql);
    if (rows.size() != 1 || rows[0].size() != 1) throw std::runtime_error(sql + ": not one value");
    return std::stoll(rows[0][0]);
  }
  // The first column of every row as a double exactly as stored (text would round it).
  std::vector<double> Doubles(const std::string& sql) {
    sqlite3_stmt* s = nullptr;
    if (sqlite3_prepare_v2(db_, sql.c_str(), -1, &s, nullptr) != SQLITE_OK) {
      throw std::runtime_error(sql + ": " + sqlite3_errmsg(db_));
    }
    std::vector<double> out;
    int rc = 0;
    while ((rc = sqlite3_step(s)) == SQLITE_ROW) out.push_back(sqlite3_column_double(s, 0));
    sqlite3_finalize(s);
    if (rc != SQLITE_DONE) throw std::runtime_error(sql + ": " + sqlite3_errmsg(db_));
    return out;
  }
  void Exec(const std::string& sql) {
    if (sqlite3_exec(db_, sql.c_str(), nullptr, nullptr, nullptr) != SQLITE_OK) {
      throw std::runtime_error(sql + ": " + sqlite3_errmsg(db_));
    }
  }
  sqlite3* db() const { return db_; }

 private:
  sqlite3* db_ = nullptr;
};

}  // namespace rimwatch::testing
