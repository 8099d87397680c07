// Run a program the way a user does and capture what it prints: posix_spawn with stdout and
// stderr redirected to temporary files (no pipes, so a large output cannot deadlock), stdin from
// /dev/null. For the CLI tests only.
#pragma once

#include <fcntl.h>
#include <spawn.h>
#include <sys/wait.h>
#include <unistd.h>

#include <cerrno>
#include <cstdio>
#include <cstdlib>
#include <fstream>
#include <sstream>
#include <stdexcept>
#include <string>
#include <vector>

extern char** environ;

namespace rimwatch::testing {

struct ProcessResult {
  int exit_code = -1;  // -1: did not exit normally (signal)
  std::string out;
  std::string err;
};

inline std::string ReadWholeFile(const std::string& path) {
  std::ifstream in(path, std::ios::binary);
  std::ostringstream s;
  s << in.rdbuf();
  return s.str();
}

inline std::string TempPath(const std::string& dir, const char* stem) {
  std::string path = dir + "/" + stem + "XXXXXX";
  const int fd = mkstemp(path.data());
  if (fd < 0) throw std::runtime_error("mkstemp failed in " + dir);
  close(fd);
  return path;
}

// argv[0] is the program path (no PATH search).
inline ProcessResult RunProcess(const std::vector<std::string>& argv, const std::string& tmp_dir) {
  const std::string out_path = TempPath(tmp_dir, "stdout.");
  const std::string err_path = TempPath(tmp_dir, "stderr.");
  posix_spawn_file_actions_t actions;
  posix_spawn_file_actions_init(&actions);
  posix_spawn_file_actions_addopen(&actions, 0, "/dev/null", O_RDONLY, 0);
  posix_spawn_file_actions_addopen(&actions, 1, out_path.c_str(), O_WRONLY | O_TRUNC, 0);
  posix_spawn_file_actions_addopen(&actions, 2, err_path.c_str(), O_WRONLY | O_TRUNC, 0);
  std::vector<char*> args;
  for (const std::string& a : argv) args.push_back(const_cast<char*>(a.c_str()));
  args.push_back(nullptr);
  pid_t pid = 0;
  const int rc = posix_spawn(&pid, args[0], &actions, nullptr, args.data(), environ);
  posix_spawn_file_actions_destroy(&actions);
  if (rc != 0) throw std::runtime_error("posix_spawn failed for " + argv[0]);
  int status = 0;
  while (waitpid(pid, &status, 0) < 0 && errno == EINTR) {
  }
  ProcessResult result;
  result.exit_code = WIFEXITED(status) ? WEXITSTATUS(status) : -1;
  result.out = ReadWholeFile(out_path);
  result.err = ReadWholeFile(err_path);
  std::remove(out_path.c_str());
  std::remove(err_path.c_str());
  return result;
}

// The value of a required environment variable, or an exception naming it.
inline std::string RequiredEnv(const char* name) {
  const char* value = std::getenv(name);
  if (value == nullptr || *value == '\0') {
    throw std::runtime_error(std::string("environment variable ") + name +
                             " is not set; run this test through ctest");
  }
  return value;
}

}  // namespace rimwatch::testing
