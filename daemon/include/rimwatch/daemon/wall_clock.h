// Wall-clock time for the daemon side only: the store's *_at columns, logs and `rimwatch tail`.
// The engine never sees it (periods come with the data).
#pragma once

#include <string>

namespace rimwatch::daemon {

// Now as ISO 8601 UTC with milliseconds: "2026-12-02T05:35:29.123Z".
std::string UtcNowText();

// UtcNowText for a caller that asks many times a millisecond (rimwatchd stamps every data
// request): the text is formatted again only when the millisecond has changed. One owner.
class UtcNowCache {
 public:
  const std::string& Now();

 private:
  long long millisecond_ = -1;
  std::string text_;
};

}  // namespace rimwatch::daemon
