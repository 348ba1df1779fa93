// A temporary directory for one test: made with mkdtemp under /tmp, removed
// with everything in it when the object goes out of scope.
//
// Thread safety: a TempDir is owned by one test; path() may be read from any
// thread.
#ifndef SKERRY_TESTS_UNIT_SERVER_TEMP_DIR_H_
#define SKERRY_TESTS_UNIT_SERVER_TEMP_DIR_H_

#include <stdlib.h>

#include <filesystem>
#include <string>
#include <system_error>

#include "gtest/gtest.h"

namespace skerry::testing {

class TempDir {
 public:
  TempDir() {
    char tmpl[] = "/tmp/skerry-test-XXXXXX";
    if (mkdtemp(tmpl) == nullptr) {
      ADD_FAILURE() << "mkdtemp failed for " << tmpl;
      return;
    }
    path_ = tmpl;
  }
  ~TempDir() {
    if (path_.empty()) return;
    std::error_code ec;
    std::filesystem::remove_all(path_, ec);
  }
  TempDir(const TempDir&) = delete;
  TempDir& operator=(const TempDir&) = delete;

  const std::string& path() const { return path_; }
  // A path inside the directory.
  std::string File(const std::string& name) const { return path_ + "/" + name; }

 private:
  std::string path_;
};

}  // namespace skerry::testing

#endif  // SKERRY_TESTS_UNIT_SERVER_TEMP_DIR_H_
