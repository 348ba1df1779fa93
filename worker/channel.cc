#include "worker/channel.h"

#include <sys/stat.h>

#include <algorithm>
#include <cerrno>
#include <cstdint>
#include <cstdlib>
#include <cstring>
#include <fstream>
#include <iterator>
#include <utility>
#include <vector>

#include "absl/strings/ascii.h"
#include "absl/strings/str_cat.h"
#include "grpcpp/create_channel.h"
#include "grpcpp/security/credentials.h"
#include "grpcpp/support/channel_arguments.h"
#include "grpcpp/support/client_interceptor.h"

namespace skerry::worker {
namespace {

constexpr size_t kMaxTokenBytes = 4096;

// Adds the bearer token to every call's metadata.
class BearerInterceptor final : public grpc::experimental::Interceptor {
 public:
  explicit BearerInterceptor(const std::string* header) : header_(header) {}
  void Intercept(grpc::experimental::InterceptorBatchMethods* m) override {
    if (m->QueryInterceptionHookPoint(
            grpc::experimental::InterceptionHookPoints::
                PRE_SEND_INITIAL_METADATA)) {
      m->GetSendInitialMetadata()->insert({"authorization", *header_});
    }
    m->Proceed();
  }

 private:
  const std::string* const header_;
};

class BearerFactory final
    : public grpc::experimental::ClientInterceptorFactoryInterface {
 public:
  explicit BearerFactory(const std::string& token)
      : header_(absl::StrCat("Bearer ", token)) {}
  grpc::experimental::Interceptor* CreateClientInterceptor(
      grpc::experimental::ClientRpcInfo* info) override {
    return new BearerInterceptor(&header_);
  }

 private:
  const std::string header_;  // lives as long as the channel
};

// The whole file; `what` names it in errors ("--tls-ca").
absl::StatusOr<std::string> Slurp(const std::string& what,
                                  const std::string& path) {
  std::ifstream in(path, std::ios::binary);
  if (!in) {
    return absl::NotFoundError(
        absl::StrCat(what, ": cannot read ", path, ": ", std::strerror(errno)));
  }
  return std::string(std::istreambuf_iterator<char>(in),
                     std::istreambuf_iterator<char>());
}

// A token must be a visible-ASCII metadata value.
absl::Status CheckToken(const std::string& token, const std::string& source) {
  if (token.size() > kMaxTokenBytes) {
    return absl::InvalidArgumentError(absl::StrCat("the token from ", source,
                                                   " is longer than ",
                                                   kMaxTokenBytes, " bytes"));
  }
  for (char c : token) {
    if (c < 0x21 || c > 0x7e) {
      return absl::InvalidArgumentError(absl::StrCat(
          "the token from ", source,
          " holds a space or a character that is not printable ASCII"));
    }
  }
  return absl::OkStatus();
}

absl::StatusOr<ResolvedToken> FromFile(const std::string& path, bool required) {
  ResolvedToken out;
  out.source = path;
  std::ifstream in(path);
  if (!in) {
    if (!required && errno == ENOENT) return ResolvedToken();
    return absl::NotFoundError(absl::StrCat("cannot read the token file ", path,
                                            ": ", std::strerror(errno)));
  }
  std::string line;
  std::getline(in, line);
  out.token = std::string(absl::StripAsciiWhitespace(line));
  if (out.token.empty()) {
    return absl::InvalidArgumentError(
        absl::StrCat("the token file ", path, " is empty"));
  }
  struct stat st {};
  if (stat(path.c_str(), &st) == 0 && (st.st_mode & 077) != 0) {
    out.warning = absl::StrCat("the token file ", path,
                               " can be read by other users; chmod 600 it");
  }
  return out;
}

}  // namespace

Getenv ProcessEnvironment() {
  return [](const char* name) {
    const char* v = std::getenv(name);
    return v == nullptr ? std::string() : std::string(v);
  };
}

absl::StatusOr<ResolvedToken> ResolveToken(const std::string& flag_token,
                                           const std::string& flag_token_file,
                                           const Getenv& getenv) {
  absl::StatusOr<ResolvedToken> out;
  if (!flag_token.empty()) {
    out = ResolvedToken{flag_token, "--token", ""};
  } else if (!flag_token_file.empty()) {
    out = FromFile(flag_token_file, true);
  } else if (std::string env = getenv(kTokenEnv); !env.empty()) {
    out = ResolvedToken{std::string(absl::StripAsciiWhitespace(env)),
                        absl::StrCat("$", kTokenEnv), ""};
  } else {
    std::string dir = getenv("XDG_CONFIG_HOME");
    if (dir.empty() && !getenv("HOME").empty())
      dir = getenv("HOME") + "/.config";
    if (dir.empty()) return ResolvedToken();
    out = FromFile(dir + "/skerry/token", false);
  }
  if (!out.ok()) return out.status();
  if (!out->token.empty()) {
    absl::Status s = CheckToken(out->token, out->source);
    if (!s.ok()) return s;
  }
  return out;
}

absl::StatusOr<std::shared_ptr<grpc::Channel>> OpenCoordinatorChannel(
    const std::string& address, const ClientSecurity& security,
    absl::Duration max_backoff, absl::Duration connect_timeout) {
  grpc::ChannelArguments args;
  const int64_t cap_ms =
      std::clamp<int64_t>(absl::ToInt64Milliseconds(max_backoff), 100, 120000);
  // gRPC gives each connection attempt max(backoff, minimum reconnect backoff)
  // to finish (doc/connection-backoff.md: MIN_CONNECT_TIMEOUT). At 100 ms, a
  // link whose first bytes take longer never connected: the minimum is the
  // connect timeout, and only the first retry's delay is short.
  const int64_t connect_ms = std::clamp<int64_t>(
      absl::ToInt64Milliseconds(connect_timeout), 100, 3600 * 1000);
  args.SetInt(GRPC_ARG_INITIAL_RECONNECT_BACKOFF_MS, 100);
  args.SetInt(GRPC_ARG_MIN_RECONNECT_BACKOFF_MS, static_cast<int>(connect_ms));
  args.SetInt(GRPC_ARG_MAX_RECONNECT_BACKOFF_MS, static_cast<int>(cap_ms));
  // Leases and reports can carry many genomes.
  args.SetMaxReceiveMessageSize(256 << 20);
  args.SetMaxSendMessageSize(256 << 20);

  std::shared_ptr<grpc::ChannelCredentials> creds;
  if (security.tls_ca_file.empty()) {
    if (!security.tls_cert_file.empty() || !security.tls_key_file.empty() ||
        !security.tls_server_name.empty()) {
      return absl::InvalidArgumentError(
          "--tls-cert, --tls-key and --tls-server-name need --tls-ca (the CA "
          "that signed the coordinator's certificate)");
    }
    creds = grpc::InsecureChannelCredentials();
  } else {
    if (security.tls_cert_file.empty() != security.tls_key_file.empty()) {
      return absl::InvalidArgumentError(
          "--tls-cert and --tls-key go together: give both or neither");
    }
    grpc::SslCredentialsOptions tls;
    absl::StatusOr<std::string> ca = Slurp("--tls-ca", security.tls_ca_file);
    if (!ca.ok()) return ca.status();
    tls.pem_root_certs = *ca;
    if (!security.tls_cert_file.empty()) {
      absl::StatusOr<std::string> cert =
          Slurp("--tls-cert", security.tls_cert_file);
      if (!cert.ok()) return cert.status();
      absl::StatusOr<std::string> key =
          Slurp("--tls-key", security.tls_key_file);
      if (!key.ok()) return key.status();
      tls.pem_cert_chain = *cert;
      tls.pem_private_key = *key;
    }
    if (!security.tls_server_name.empty()) {
      args.SetSslTargetNameOverride(security.tls_server_name);
    }
    creds = grpc::SslCredentials(tls);
  }
  std::vector<
      std::unique_ptr<grpc::experimental::ClientInterceptorFactoryInterface>>
      interceptors;
  if (!security.token.empty()) {
    interceptors.push_back(std::make_unique<BearerFactory>(security.token));
  }
  return grpc::experimental::CreateCustomChannelWithInterceptors(
      address, creds, args, std::move(interceptors));
}

std::shared_ptr<grpc::Channel> CreateCoordinatorChannel(
    const std::string& address, absl::Duration max_backoff,
    absl::Duration connect_timeout) {
  // Plaintext without a token cannot fail.
  return *OpenCoordinatorChannel(address, ClientSecurity(), max_backoff,
                                 connect_timeout);
}

}  // namespace skerry::worker
