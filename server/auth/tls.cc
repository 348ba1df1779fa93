#include "server/auth/tls.h"

#include <cerrno>
#include <cstring>
#include <fstream>
#include <sstream>

#include "absl/strings/match.h"
#include "absl/strings/str_cat.h"
#include "grpcpp/security/server_credentials.h"

namespace skerry::auth {
namespace {

// A PEM file, whole; `flag` names where its path came from.
absl::StatusOr<std::string> ReadPem(const std::string& flag,
                                    const std::string& path) {
  std::ifstream in(path, std::ios::binary);
  if (!in) {
    return absl::NotFoundError(
        absl::StrCat(flag, ": cannot read ", path, ": ", std::strerror(errno)));
  }
  std::ostringstream text;
  text << in.rdbuf();
  if (!absl::StrContains(text.str(), "-----BEGIN ")) {
    return absl::InvalidArgumentError(
        absl::StrCat(flag, ": ", path, " is not a PEM file"));
  }
  return text.str();
}

}  // namespace

absl::StatusOr<std::shared_ptr<grpc::ServerCredentials>> MakeServerCredentials(
    const TlsServerFiles& files) {
  if (files.cert.empty() != files.key.empty()) {
    return absl::InvalidArgumentError(
        "--tls-cert and --tls-key go together: give both or neither");
  }
  if (files.cert.empty()) {
    if (!files.client_ca.empty()) {
      return absl::InvalidArgumentError(
          "--tls-client-ca needs TLS: give --tls-cert and --tls-key too");
    }
    return grpc::InsecureServerCredentials();
  }
  grpc::SslServerCredentialsOptions options;
  grpc::SslServerCredentialsOptions::PemKeyCertPair pair;
  absl::StatusOr<std::string> cert = ReadPem("--tls-cert", files.cert);
  if (!cert.ok()) return cert.status();
  absl::StatusOr<std::string> key = ReadPem("--tls-key", files.key);
  if (!key.ok()) return key.status();
  pair.cert_chain = *cert;
  pair.private_key = *key;
  options.pem_key_cert_pairs.push_back(pair);
  if (!files.client_ca.empty()) {
    absl::StatusOr<std::string> ca =
        ReadPem("--tls-client-ca", files.client_ca);
    if (!ca.ok()) return ca.status();
    options.pem_root_certs = *ca;
    options.client_certificate_request =
        GRPC_SSL_REQUEST_AND_REQUIRE_CLIENT_CERTIFICATE_AND_VERIFY;
  }
  return grpc::SslServerCredentials(options);
}

}  // namespace skerry::auth
