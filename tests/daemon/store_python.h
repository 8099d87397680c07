// Test-only: run a Python script with Debian's /usr/bin/python3 (the standard library's datetime
// and sqlite3 modules serve as outside references) and capture what it prints.
#pragma once

#include <fstream>
#include <string>
#include <vector>

#include "cli/run_process.h"

namespace rimwatch::testing {

// Writes `script` to a file in `dir` and runs `/usr/bin/python3 FILE args...`.
inline ProcessResult RunPython(const std::string& script, const std::vector<std::string>& args,
                               const std::string& dir) {
  const std::string path = TempPath(dir, "script.");
  std::ofstream(path, std::ios::binary) << script;
  std::vector<std::string> argv = {"/usr/bin/python3", path};
  argv.insert(argv.end(), args.begin(), args.end());
  ProcessResult r = RunProcess(argv, dir);
  std::remove(path.c_str());
  return r;
}

}  // namespace rimwatch::testing
