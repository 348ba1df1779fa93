// The coordinator's transport security: TLS on its listening port when a
// certificate and key are given (gRPC's SSL server credentials), and optional
// client certificates: with a client CA, every client must present a
// certificate signed by it (requested, required and verified), else the
// connection is refused before any call is made.
//
// Thread safety: pure functions.
#ifndef SKERRY_SERVER_AUTH_TLS_H_
#define SKERRY_SERVER_AUTH_TLS_H_

#include <memory>
#include <string>

#include "absl/status/statusor.h"
#include "grpcpp/security/server_credentials.h"

namespace skerry::auth {

struct TlsServerFiles {
  std::string cert;       // PEM certificate chain; empty: no TLS
  std::string key;        // PEM private key
  std::string client_ca;  // PEM CA bundle; empty: no client certificates
};

// Insecure credentials when `files.cert` is empty. InvalidArgument for an
// incomplete set; NotFound naming a file that cannot be read.
absl::StatusOr<std::shared_ptr<grpc::ServerCredentials>> MakeServerCredentials(
    const TlsServerFiles& files);

}  // namespace skerry::auth

#endif  // SKERRY_SERVER_AUTH_TLS_H_
