#include "rimwatch/daemon/wall_clock.h"

#include <chrono>
#include <cstdio>
#include <ctime>

namespace rimwatch::daemon {

namespace {

std::string Format(std::chrono::system_clock::time_point now) {
  const std::time_t secs = std::chrono::system_clock::to_time_t(now);
  const auto ms =
      std::chrono::duration_cast<std::chrono::milliseconds>(now.time_since_epoch()).count() % 1000;
  std::tm tm{};
  gmtime_r(&secs, &tm);
  char buf[80];
  std::snprintf(buf, sizeof buf, "%04d-%02d-%02dT%02d:%02d:%02d.%03dZ", tm.tm_year + 1900,
                tm.tm_mon + 1, tm.tm_mday, tm.tm_hour, tm.tm_min, tm.tm_sec, static_cast<int>(ms));
  return buf;
}

}  // namespace

std::string UtcNowText() { return Format(std::chrono::system_clock::now()); }

const std::string& UtcNowCache::Now() {
  const auto now = std::chrono::system_clock::now();
  const long long ms =
      std::chrono::duration_cast<std::chrono::milliseconds>(now.time_since_epoch()).count();
  if (ms != millisecond_) {
    millisecond_ = ms;
    text_ = Format(now);
  }
  return text_;
}

}  // namespace rimwatch::daemon
