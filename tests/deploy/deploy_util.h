// Helpers shared by the deploy tests: reading files, the flags a help text or
// a man page names, a staged `cmake --install` of this build tree, and the
// paths of the build and the sources.
//
// Thread safety: pure functions, except StagedInstall, which writes only under
// the folder it is given.
#ifndef SKERRY_TESTS_DEPLOY_DEPLOY_UTIL_H_
#define SKERRY_TESTS_DEPLOY_DEPLOY_UTIL_H_

#include <set>
#include <string>
#include <vector>

#include "tests/support/process.h"

namespace skerry::testing {

// The file's whole text, or "" when it cannot be read.
std::string ReadWholeFile(const std::string& path);
bool PathExists(const std::string& path);

// Every "--flag" in a help text (e.g. "--exit-when-idle").
std::set<std::string> HelpFlags(const std::string& text);
// Every "\-\-flag" in a man page's troff source, unescaped to "--flag".
std::set<std::string> ManFlags(const std::string& troff);

// `cmake --install` of this build tree with prefix /usr into root (DESTDIR),
// as the Debian package lays it out. The command's output on failure.
CommandResult StagedInstall(const std::string& root);

// RunCommand, looking argv[0] up on PATH when it names no folder.
CommandResult RunTool(std::vector<std::string> argv,
                      absl::Duration timeout = absl::Seconds(60));

// A run spec on the sphere function evaluated by programs/slow_sphere.py,
// which sleeps `seconds` per evaluation: a run of islands x population x
// generations evaluations that lasts long enough to be disturbed.
std::string SlowSphereSpec(const std::string& name, int islands, int population,
                           int generations, double seconds);

// `skerry local SPEC --workers 2 --db DB`, the loopback reference of a run
// disturbed by the network tests: its evaluators are sandboxed like a
// worker's, so the test programs' folder is passed as --evaluator-dirs.
CommandResult RunLocalReference(const std::string& spec, const std::string& db);

// The port in a coordinator's "listening on port N" line, or 0.
int ListeningPort(const std::string& log);

// Whether `program` is on PATH.
bool OnPath(const std::string& program);

}  // namespace skerry::testing

#endif  // SKERRY_TESTS_DEPLOY_DEPLOY_UTIL_H_
