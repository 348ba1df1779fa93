// The Debian package: built by scripts/package from this build tree,
// inspected with dpkg-deb, unpacked into a throwaway
// root, and its dependencies checked against the libraries the binaries
// really load. Installing it on this machine is the opt-in `deploy` tier
// (dpkg_install_test.cc).
#include <set>
#include <sstream>
#include <string>
#include <vector>

#include "absl/strings/match.h"
#include "absl/strings/str_cat.h"
#include "absl/strings/str_split.h"
#include "absl/strings/strip.h"
#include "common/version.h"
#include "gmock/gmock.h"
#include "gtest/gtest.h"
#include "tests/deploy/deploy_util.h"
#include "tests/support/process.h"

namespace skerry {
namespace {

using ::testing::HasSubstr;
using testing::RunTool;

class PackageTest : public ::testing::Test {
 protected:
  static void SetUpTestSuite() {
    dir_ = new testing::TempDir();
    // scripts/package on this build tree (its binaries are up to date).
    build_ = new testing::CommandResult(
        RunTool({"env", std::string("BUILD_DIR=") + SKERRY_BUILD_DIR,
                 "PACKAGE_DIR=" + dir_->path(), "JOBS=1",
                 SKERRY_SOURCE_DIR "/scripts/package"},
                absl::Seconds(600)));
  }
  static void TearDownTestSuite() {
    delete build_;
    delete dir_;
  }
  void SetUp() override {
    if (!testing::OnPath("dpkg-deb") || !testing::OnPath("dpkg-shlibdeps")) {
      GTEST_SKIP() << "dpkg-deb or dpkg-shlibdeps missing (package dpkg-dev; "
                      "deploy/install-deps.sh installs it)";
    }
    ASSERT_EQ(build_->exit_code, 0) << build_->output;
    deb_ = dir_->File(absl::StrCat("skerry_", kVersion, "_amd64.deb"));
    if (!testing::PathExists(deb_)) {
      // Another architecture: whatever CPack named it.
      testing::CommandResult ls = RunTool(
          {"sh", "-c", absl::StrCat("ls '", dir_->path(), "'/skerry_*.deb")});
      deb_ = std::string(absl::StripTrailingAsciiWhitespace(ls.output));
    }
    ASSERT_TRUE(testing::PathExists(deb_)) << build_->output;
  }
  std::string Field(const std::string& name) {
    testing::CommandResult r = RunTool({"dpkg-deb", "-f", deb_, name});
    EXPECT_EQ(r.exit_code, 0) << r.output;
    return std::string(absl::StripTrailingAsciiWhitespace(r.output));
  }

  static testing::TempDir* dir_;
  static testing::CommandResult* build_;
  std::string deb_;
};
testing::TempDir* PackageTest::dir_ = nullptr;
testing::CommandResult* PackageTest::build_ = nullptr;

TEST_F(PackageTest, ControlFieldsNameTheReleaseAndTheRuntimeLibraries) {
  EXPECT_EQ(Field("Package"), "skerry");
  EXPECT_EQ(Field("Version"), kVersion);
  const std::string depends = Field("Depends");
  // The runtime libraries of Debian 12 that the binaries link.
  for (const char* library : {"libgrpc++1.51", "libprotobuf32", "libsqlite3-0",
                              "libabsl20220623", "libc6"}) {
    EXPECT_THAT(depends, HasSubstr(library));
  }
  EXPECT_THAT(depends, HasSubstr("passwd"));  // useradd, in postinst
}

TEST_F(PackageTest, HoldsTheInstalledLayoutAndMarksSettingsAsConffiles) {
  testing::CommandResult contents = RunTool({"dpkg-deb", "-c", deb_});
  ASSERT_EQ(contents.exit_code, 0) << contents.output;
  for (const char* path :
       {"./usr/bin/skerry-coordinator", "./usr/bin/skerry-worker",
        "./usr/bin/skerry", "./usr/lib/systemd/system/skerry-worker@.service",
        "./usr/lib/systemd/system/skerry-coordinator.service",
        "./usr/share/man/man1/skerry-worker.1",
        "./usr/share/doc/skerry/deployment.md",
        "./etc/skerry/coordinator.env"}) {
    EXPECT_THAT(contents.output, HasSubstr(path));
  }
  testing::TempDir control;
  ASSERT_EQ(RunTool({"dpkg-deb", "-e", deb_, control.File("DEBIAN")}).exit_code,
            0);
  const std::string conffiles =
      testing::ReadWholeFile(control.File("DEBIAN/conffiles"));
  EXPECT_THAT(conffiles, HasSubstr("/etc/skerry/coordinator.env\n"));
  EXPECT_THAT(conffiles, HasSubstr("/etc/skerry/worker.env\n"));
  const std::string postinst =
      testing::ReadWholeFile(control.File("DEBIAN/postinst"));
  EXPECT_THAT(postinst, HasSubstr("systemd-sysusers skerry.conf"));
  EXPECT_EQ(RunTool({"sh", "-n", control.File("DEBIAN/postinst")}).exit_code,
            0);
}

// Unpacked into a throwaway root, the binaries run, and every shared library
// they name belongs to a package named in Depends: on a fresh Debian 12, apt
// pulls in all of them (and theirs).
TEST_F(PackageTest, UnpackedBinariesRunAndDependsCoversEveryLibraryTheyLoad) {
  testing::TempDir root;
  ASSERT_EQ(RunTool({"dpkg-deb", "-x", deb_, root.path()}).exit_code, 0);
  const std::string depends = Field("Depends");
  std::set<std::string> named;
  for (absl::string_view item : absl::StrSplit(depends, ',')) {
    item = absl::StripAsciiWhitespace(item);
    named.insert(std::string(item.substr(0, item.find(' '))));
  }
  for (const char* program :
       {"skerry-coordinator", "skerry-worker", "skerry"}) {
    SCOPED_TRACE(program);
    const std::string binary = root.File(absl::StrCat("usr/bin/", program));
    testing::CommandResult version = RunTool({binary, "--version"});
    EXPECT_EQ(version.exit_code, 0) << version.output;
    EXPECT_EQ(version.output, VersionLine(program));
    // The libraries the binary names itself (NEEDED); those they need in
    // turn come with their own packages' dependencies.
    testing::CommandResult dynamic = RunTool({"readelf", "-d", binary});
    ASSERT_EQ(dynamic.exit_code, 0) << dynamic.output;
    std::set<std::string> needed;
    for (absl::string_view line : absl::StrSplit(dynamic.output, '\n')) {
      const size_t open = line.find("(NEEDED)");
      if (open == absl::string_view::npos) continue;
      const size_t lb = line.find('[');
      const size_t rb = line.find(']');
      if (lb != absl::string_view::npos && rb > lb) {
        needed.insert(std::string(line.substr(lb + 1, rb - lb - 1)));
      }
    }
    // ldd prints "name => /path (address)" per library.
    testing::CommandResult ldd = RunTool({"ldd", binary});
    ASSERT_EQ(ldd.exit_code, 0) << ldd.output;
    int libraries = 0;
    for (absl::string_view line : absl::StrSplit(ldd.output, '\n')) {
      const size_t arrow = line.find("=> /");
      if (arrow == absl::string_view::npos) continue;
      const std::string soname(
          absl::StripAsciiWhitespace(line.substr(0, arrow)));
      if (needed.count(soname) == 0) continue;
      std::string path(line.substr(arrow + 3));
      path = path.substr(0, path.find(' '));
      // dpkg knows a file by the path its package shipped, which with
      // merged /usr may differ from the one ldd prints.
      testing::CommandResult owner = RunTool(
          {"sh", "-c",
           absl::StrCat(
               "p='", path,
               "'; dpkg -S \"$p\" 2>/dev/null || dpkg -S \"$(realpath "
               "\"$p\")\" 2>/dev/null "
               "|| dpkg -S \"/usr$p\" 2>/dev/null || dpkg -S \"${p#/usr}\"")});
      ASSERT_EQ(owner.exit_code, 0) << path << ": " << owner.output;
      // "libgrpc++1.51:amd64: /usr/lib/..." -> "libgrpc++1.51"
      std::string first = owner.output.substr(0, owner.output.find('\n'));
      std::string package = first.substr(0, first.find_first_of(":,"));
      ++libraries;
      EXPECT_EQ(named.count(package), 1u)
          << path << " comes from " << package
          << ", which Depends does not name: " << depends;
    }
    EXPECT_EQ(libraries, static_cast<int>(needed.size())) << ldd.output;
    EXPECT_GE(libraries, 5);
  }
}

}  // namespace
}  // namespace skerry
