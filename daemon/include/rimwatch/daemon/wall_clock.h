// Wall-clock time for the daemon side only: the store's *_at columns, logs and `rimwatch tail`.
// The engine never sees it (periods come with the data).
#pragma once

#include <string>

namespace rimwatch::daemon {

// Now as ISO 8601 UTC with milliseconds: "2026-12-02T05:35:29.123Z".
std::string UtcNowText();

}  // namespace rimwatch::daemon
