#include "tests/deploy/deploy_util.h"

#include <sys/stat.h>

#include <cctype>
#include <fstream>
#include <regex>
#include <sstream>

#include "absl/strings/str_cat.h"
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

std::string SlowSphereSpec(const std::string& name, int islands, int population,
                           int generations, double seconds) {
  return absl::StrCat(
      "name: \"", name, "\"\nseed: 16160\ngenome_length: 4\n",
      "lower_bound: -5\nupper_bound: 5\n",
      "evaluator {\n  external {\n    argv: \"/usr/bin/python3\"\n",
      "    argv: \"", SKERRY_SOURCE_DIR,
      "/tests/deploy/programs/slow_sphere.py\"\n    argv: \"", seconds,
      "\"\n  }\n  time_limit_seconds: 30\n}\n",
      "ga { population_size: ", population, " elites: 1 }\n",
      "islands { count: ", islands,
      " topology: RING interval: 3 migrants: 1 }\n",
      "stop { max_generations: ", generations, " }\n");
}

CommandResult RunLocalReference(const std::string& spec,
                                const std::string& db) {
  return RunCommand(
      {SKERRY_CLI_BIN, "local", spec, "--workers", "2", "--db", db,
       "--evaluator-dirs", SKERRY_SOURCE_DIR "/tests/deploy/programs"},
      absl::Seconds(600));
}

int ListeningPort(const std::string& log) {
  const std::string marker = "listening on port ";
  const size_t at = log.find(marker);
  if (at == std::string::npos) return 0;
  int port = 0;
  for (size_t i = at + marker.size();
       i < log.size() && isdigit(static_cast<unsigned char>(log[i])); ++i) {
    port = port * 10 + (log[i] - '0');
    if (port > 65535) return 0;
  }
  return port;
}

bool OnPath(const std::string& program) {
  return RunTool({"sh", "-c", "command -v " + program}).exit_code == 0;
}

}  // namespace skerry::testing
