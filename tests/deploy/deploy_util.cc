#include "tests/deploy/deploy_util.h"

#include <sys/stat.h>

#include <fstream>
#include <regex>
#include <sstream>

#include "absl/strings/str_replace.h"

namespace skerry::testing {

std::string ReadWholeFile(const std::string& path) {
  std::ifstream in(path);
  std::stringstream text;
  text << in.rdbuf();
  return text.str();
}

bool PathExists(const std::string& path) {
  struct stat st {};
  return stat(path.c_str(), &st) == 0;
}

std::set<std::string> HelpFlags(const std::string& text) {
  std::set<std::string> flags;
  const std::regex flag("--[a-z][a-z-]*[a-z]");
  for (auto it = std::sregex_iterator(text.begin(), text.end(), flag);
       it != std::sregex_iterator(); ++it) {
    flags.insert(it->str());
  }
  return flags;
}

std::set<std::string> ManFlags(const std::string& troff) {
  // In troff a hyphen is written \- ; comment lines (.\") are skipped.
  std::string body;
  std::istringstream lines(troff);
  for (std::string line; std::getline(lines, line);) {
    if (line.rfind(".\\\"", 0) == 0) continue;
    body += line + "\n";
  }
  return HelpFlags(absl::StrReplaceAll(body, {{"\\-", "-"}}));
}

CommandResult RunTool(std::vector<std::string> argv, absl::Duration timeout) {
  if (!argv.empty() && argv[0].find('/') == std::string::npos) {
    argv.insert(argv.begin(), "/usr/bin/env");
  }
  return RunCommand(argv, timeout);
}

CommandResult StagedInstall(const std::string& root) {
  return RunTool({"env", "DESTDIR=" + root, "cmake", "--install",
                  SKERRY_BUILD_DIR, "--prefix", "/usr"},
                 absl::Seconds(120));
}

bool OnPath(const std::string& program) {
  return RunTool({"sh", "-c", "command -v " + program}).exit_code == 0;
}

}  // namespace skerry::testing
