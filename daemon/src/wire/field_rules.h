// Field rules shared by the two request readers of wire.cc and data_reader.cc (private to
// src/wire/). One definition of what a series name, a model name and an "integer written as text"
// are, so the general decoder and the single-pass data reader cannot disagree on them.
#pragma once

#include <cstddef>
#include <string_view>

namespace rimwatch::daemon::wire_rules {

inline constexpr std::size_t kMaxSeriesName = 128;  // [A-Za-z0-9_.:-], 1..128 characters
inline constexpr std::size_t kMaxModelName = 64;    // [A-Za-z0-9_.-], 1..64 (ModelSpec::name)

inline bool IsSeriesChar(char c) {
  return (c >= 'A' && c <= 'Z') || (c >= 'a' && c <= 'z') || (c >= '0' && c <= '9') || c == '_' ||
         c == '.' || c == ':' || c == '-';
}

inline bool IsName(std::string_view text, std::size_t max_length, bool allow_colon) {
  if (text.empty() || text.size() > max_length) return false;
  for (char c : text) {
    if (!IsSeriesChar(c) || (c == ':' && !allow_colon)) return false;
  }
  return true;
}

// "-?[0-9]+": a period sent as a string of digits (refused: integers travel as JSON numbers).
inline bool LooksLikeInteger(std::string_view text) {
  std::size_t i = !text.empty() && text[0] == '-' ? 1 : 0;
  if (i == text.size()) return false;
  for (; i < text.size(); ++i) {
    if (text[i] < '0' || text[i] > '9') return false;
  }
  return true;
}

}  // namespace rimwatch::daemon::wire_rules
