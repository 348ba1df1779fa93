// TLS end to end with real processes. A throwaway CA, a server certificate for
// 127.0.0.1 and a client certificate are made with the `openssl` command in a
// temporary folder at test time (no key material is committed). The
// coordinator serves TLS and requires client certificates; a worker and the
// CLI reach it with the CA and a client certificate and finish a run. A client
// without the CA, or without a client certificate, is refused; a worker with a
// token of another role is refused; the CLI never prints the token it uses.
#include <string>
#include <vector>

#include "absl/strings/str_cat.h"
#include "gmock/gmock.h"
#include "gtest/gtest.h"
#include "tests/e2e/access_fixture.h"
#include "tests/support/process.h"

namespace skerry {
namespace {

using testing::CommandResult;
using ::testing::HasSubstr;
using ::testing::Not;
using testing::RunCommand;

constexpr char kSpec[] = R"(
name: "over-tls"
seed: 11
genome_length: 3
evaluator { builtin { function: "sphere" } }
ga { population_size: 8 }
stop { max_generations: 4 }
)";

class TlsTest : public ::testing::Test {
 protected:
  void SetUp() override {
    ASSERT_NO_FATAL_FAILURE(MakeCertificates());
    const std::string db = dir_.File("skerry.db");
    absl::StatusOr<std::string> admin =
        testing::InitAdmin(SKERRY_COORDINATOR_BIN, db, "ada");
    ASSERT_TRUE(admin.ok()) << admin.status();
    admin_ = *admin;
    ASSERT_TRUE(testing::WriteTextFile(File("admin.token"), admin_ + "\n"));
    auto c = testing::StartCoordinator(
        SKERRY_COORDINATOR_BIN, db, File("coordinator.log"),
        {"--tls-cert", File("server.pem"), "--tls-key", File("server.key"),
         "--tls-client-ca", File("ca.pem")});
    ASSERT_TRUE(c.ok()) << c.status();
    coordinator_ = std::make_unique<testing::StartedCoordinator>(std::move(*c));
  }

  std::string File(const std::string& name) const { return dir_.File(name); }

  void OpenSsl(const std::vector<std::string>& args) {
    std::vector<std::string> argv = {SKERRY_OPENSSL_BIN};
    argv.insert(argv.end(), args.begin(), args.end());
    CommandResult r = RunCommand(argv);
    ASSERT_EQ(r.exit_code, 0) << "openssl (deploy/install-deps.sh installs it) "
                              << args[0] << ": " << r.output;
  }

  // One CA; a server certificate for IP 127.0.0.1; a client certificate.
  // P-256 keys: quick to make (common practice for throwaway test PKI).
  void MakeCertificates() {
    const std::vector<std::string> ec = {
        "-newkey", "ec", "-pkeyopt", "ec_paramgen_curve:prime256v1", "-nodes"};
    std::vector<std::string> ca = {"req",     "-x509",
                                   "-days",   "2",
                                   "-subj",   "/CN=skerry test CA",
                                   "-keyout", File("ca.key"),
                                   "-out",    File("ca.pem")};
    ca.insert(ca.begin() + 2, ec.begin(), ec.end());
    ASSERT_NO_FATAL_FAILURE(OpenSsl(ca));
    for (const std::string who : {"server", "client"}) {
      ASSERT_TRUE(testing::WriteTextFile(
          File(who + ".ext"),
          who == "server"
              ? "subjectAltName=IP:127.0.0.1\nextendedKeyUsage=serverAuth\n"
              : "extendedKeyUsage=clientAuth\n"));
      std::vector<std::string> req = {"req",
                                      "-subj",
                                      "/CN=skerry " + who,
                                      "-keyout",
                                      File(who + ".key"),
                                      "-out",
                                      File(who + ".csr")};
      req.insert(req.begin() + 1, ec.begin(), ec.end());
      ASSERT_NO_FATAL_FAILURE(OpenSsl(req));
      ASSERT_NO_FATAL_FAILURE(OpenSsl(
          {"x509", "-req", "-in", File(who + ".csr"), "-CA", File("ca.pem"),
           "-CAkey", File("ca.key"), "-CAcreateserial", "-days", "2",
           "-extfile", File(who + ".ext"), "-out", File(who + ".pem")}));
    }
  }

  // The CLI with the CA, the client certificate and `token_file`.
  std::vector<std::string> Cli(const std::string& token_file,
                               std::vector<std::string> args) {
    std::vector<std::string> argv = {
        SKERRY_CLI_BIN,     "--coordinator", coordinator_->address(),
        "--tls-ca",         File("ca.pem"),  "--tls-cert",
        File("client.pem"), "--tls-key",     File("client.key"),
        "--token-file",     token_file};
    argv.insert(argv.end(), args.begin(), args.end());
    return argv;
  }

  // A token made through the CLI over TLS, saved to NAME.token.
  std::string NewToken(const std::string& name, const std::string& role) {
    CommandResult r = RunCommand(
        Cli(File("admin.token"), {"token", "create", name, "--role", role}));
    EXPECT_EQ(r.exit_code, 0) << r.output;
    const std::string token = testing::TokenIn(r.output);
    EXPECT_FALSE(token.empty()) << r.output;
    EXPECT_TRUE(testing::WriteTextFile(File(name + ".token"), token + "\n"));
    return token;
  }

  std::vector<std::string> Worker(const std::string& token_file) {
    return {SKERRY_WORKER_BIN,
            "--coordinator",
            coordinator_->address(),
            "--threads",
            "2",
            "--tls-ca",
            File("ca.pem"),
            "--tls-cert",
            File("client.pem"),
            "--tls-key",
            File("client.key"),
            "--token-file",
            token_file};
  }

  testing::TempDir dir_;
  std::string admin_;
  std::unique_ptr<testing::StartedCoordinator> coordinator_;
};

TEST_F(TlsTest, WorkerAndCliFinishARunOverTls) {
  NewToken("rita", "researcher");
  NewToken("box1", "worker");
  ASSERT_TRUE(testing::WriteTextFile(File("run.spec"), kSpec));
  CommandResult submitted =
      RunCommand(Cli(File("rita.token"), {"submit", File("run.spec")}));
  ASSERT_EQ(submitted.exit_code, 0) << submitted.output;
  auto worker =
      testing::Process::Start(Worker(File("box1.token")), File("worker.log"));
  ASSERT_TRUE(worker.ok()) << worker.status();
  CommandResult watched =
      RunCommand(Cli(File("rita.token"), {"watch", "1"}), absl::Seconds(120));
  EXPECT_EQ(watched.exit_code, 0) << watched.output << worker->Log();
  EXPECT_THAT(watched.output, HasSubstr("finished"));
  worker->Signal(SIGTERM);
  EXPECT_TRUE(worker->Wait(absl::Seconds(30)).ok());
  CommandResult audit =
      RunCommand(Cli(File("admin.token"), {"audit", "--run", "1"}));
  EXPECT_EQ(audit.exit_code, 0) << audit.output;
  EXPECT_THAT(audit.output, HasSubstr("rita"));
  EXPECT_THAT(audit.output, HasSubstr("RunService/SubmitRun"));
}

TEST_F(TlsTest, ClientsWithoutTheCaOrAClientCertificateAreRefused) {
  // Plaintext against a TLS port: no call gets through.
  CommandResult plain =
      RunCommand({SKERRY_CLI_BIN, "--coordinator", coordinator_->address(),
                  "--token-file", File("admin.token"), "list"});
  EXPECT_EQ(plain.exit_code, 3) << plain.output;
  // TLS but not trusting this CA (the server certificate as the only root).
  CommandResult wrong_ca = RunCommand(
      {SKERRY_CLI_BIN, "--coordinator", coordinator_->address(), "--tls-ca",
       File("client.pem"), "--tls-cert", File("client.pem"), "--tls-key",
       File("client.key"), "--token-file", File("admin.token"), "list"});
  EXPECT_EQ(wrong_ca.exit_code, 3) << wrong_ca.output;
  // The right CA, but no client certificate.
  CommandResult no_cert = RunCommand(
      {SKERRY_CLI_BIN, "--coordinator", coordinator_->address(), "--tls-ca",
       File("ca.pem"), "--token-file", File("admin.token"), "list"});
  EXPECT_EQ(no_cert.exit_code, 3) << no_cert.output;
  // Everything right.
  CommandResult ok = RunCommand(Cli(File("admin.token"), {"list"}));
  EXPECT_EQ(ok.exit_code, 0) << ok.output;
}

TEST_F(TlsTest, WorkerWithATokenOfAnotherRoleIsRefused) {
  NewToken("rita", "researcher");
  for (const std::string who : {"rita", "admin"}) {
    SCOPED_TRACE(who);
    CommandResult r =
        RunCommand(Worker(File(who + ".token")), absl::Seconds(60));
    EXPECT_EQ(r.exit_code, 1) << r.output;
    EXPECT_THAT(r.output, HasSubstr("PERMISSION_DENIED"));
    EXPECT_THAT(r.output, HasSubstr("needs role worker"));
  }
}

TEST_F(TlsTest, CliNeverPrintsTheTokenItUses) {
  const std::string rita = NewToken("rita", "researcher");
  CommandResult revoke =
      RunCommand(Cli(File("admin.token"), {"token", "revoke", "2"}));
  ASSERT_EQ(revoke.exit_code, 0) << revoke.output;
  const std::vector<std::string> base = {
      SKERRY_CLI_BIN,     "--coordinator", coordinator_->address(),
      "--tls-ca",         File("ca.pem"),  "--tls-cert",
      File("client.pem"), "--tls-key",     File("client.key")};
  const std::vector<std::vector<std::string>> cases = {
      {"--token", admin_, "list"},
      {"--token", admin_, "token", "list", "--all"},
      {"--token", admin_, "show", "999"},
      {"--token", admin_, "whoami"},
      {"--token=" + admin_, "audit"},
      {"--token", admin_, "--tokn=" + admin_, "list"},
      {"--token", admin_, "list", admin_},
      {"list", "--token"},
      {"--token", admin_ + " x", "list"},
      {"--token", rita, "list"},  // revoked
      {"--token", rita, "token", "create", "eve", "--role", "admin"},
  };
  for (const auto& c : cases) {
    std::vector<std::string> argv = base;
    argv.insert(argv.end(), c.begin(), c.end());
    CommandResult r = RunCommand(argv);
    SCOPED_TRACE(r.output);
    EXPECT_THAT(r.output, Not(HasSubstr(admin_.substr(4))));
    EXPECT_THAT(r.output, Not(HasSubstr(rita.substr(4))));
  }
}

}  // namespace
}  // namespace skerry
