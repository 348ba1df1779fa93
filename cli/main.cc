// skerry: the command-line client. Everything but building the channel lives in
// skerry_cli_lib (cli/commands.h).
#include <unistd.h>

#include <cstdio>
#include <cstdlib>
#include <iostream>
#include <memory>
#include <string>
#include <vector>

#include "cli/client.h"
#include "cli/commands.h"
#include "cli/local.h"
#include "grpcpp/create_channel.h"
#include "grpcpp/security/credentials.h"
#include "skerry/v1/runs.grpc.pb.h"

int main(int argc, char** argv) {
  std::vector<std::string> args(argv + 1, argv + argc);
  const char* env = std::getenv(skerry::cli::kCoordinatorEnv);
  skerry::cli::Io io;
  io.out = &std::cout;
  io.err = &std::cerr;
  io.interactive = isatty(fileno(stdout)) != 0;
  io.zone = absl::LocalTimeZone();
  io.run_local = skerry::cli::LocalCommand;
  auto factory = [&io](const std::string& target,
                       const skerry::worker::ClientSecurity& security)
      -> std::unique_ptr<skerry::cli::RunClient> {
    auto channel = skerry::cli::CoordinatorChannel(target, security);
    if (!channel.ok()) {
      *io.err << "skerry: "
              << skerry::cli::Redact(std::string(channel.status().message()),
                                     io)
              << "\n";
      return nullptr;
    }
    return std::make_unique<skerry::cli::RunClient>(
        skerry::v1::RunService::NewStub(*channel), target);
  };
  return skerry::cli::RunCli(args, env == nullptr ? "" : env, factory, io);
}
