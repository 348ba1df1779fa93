// The one place where a client's channel to the coordinator is made (the
// worker's, and the CLI's through cli/client.h): transport security, the bearer
// token, and reconnect backoff.
//
// Token: sent on every call as the metadata "authorization: Bearer TOKEN", by
// a client interceptor (gRPC sends call credentials only over TLS; this works
// on plaintext loopback too). ResolveToken finds it, first match wins:
//   1. a --token flag,
//   2. a --token-file flag,
//   3. the environment variable SKERRY_TOKEN,
//   4. the file $XDG_CONFIG_HOME/skerry/token, else ~/.config/skerry/token
//      (first line; absent is fine: no token is sent).
// No message ever contains the token itself; they name where it came from.
//
// TLS: with a CA file the channel is TLS and the coordinator's certificate
// must be signed by that CA; with a client certificate and key as well, the
// client presents them (for a coordinator started with --tls-client-ca).
//
// The channel's own reconnect backoff is capped at max_backoff, so a restarted
// coordinator is found again about as fast as the worker's RPC retries expect.
// A connection attempt (TCP, TLS and the HTTP/2 handshake) may take up to
// connect_timeout: gRPC uses its minimum reconnect backoff as that bound, so
// the first retry stays quick (100 ms) while a link with seconds of latency
// still connects (kDefaultConnectTimeout; both programs' --timeout).
//
// Thread safety: pure functions; the returned channel may be shared by
// threads.
#ifndef SKERRY_WORKER_CHANNEL_H_
#define SKERRY_WORKER_CHANNEL_H_

#include <functional>
#include <memory>
#include <string>

#include "absl/status/statusor.h"
#include "absl/time/time.h"
#include "grpcpp/channel.h"

namespace skerry::worker {

inline constexpr char kTokenEnv[] = "SKERRY_TOKEN";

// How long one connection attempt may take unless --timeout says otherwise.
inline constexpr absl::Duration kDefaultConnectTimeout = absl::Seconds(20);

struct ClientSecurity {
  std::string token;          // empty: no authorization metadata
  std::string tls_ca_file;    // set: TLS, verifying the coordinator
  std::string tls_cert_file;  // client certificate chain (PEM) ...
  std::string tls_key_file;   // ... and its key, for client-certificate checks
  std::string tls_server_name;  // name to check in the certificate; default:
                                // the host of the address
};

// Reads an environment variable; "" when unset. Tests pass their own.
using Getenv = std::function<std::string(const char* name)>;
Getenv ProcessEnvironment();

struct ResolvedToken {
  std::string token;    // empty: none found
  std::string source;   // "--token", "$SKERRY_TOKEN", a file name; for messages
  std::string warning;  // non-empty: say it on stderr (e.g. a readable file)
};
// InvalidArgument (naming the source, never the token) for a token that cannot
// travel in metadata; NotFound for a --token-file that cannot be read.
absl::StatusOr<ResolvedToken> ResolveToken(const std::string& flag_token,
                                           const std::string& flag_token_file,
                                           const Getenv& getenv);

// address is HOST:PORT. InvalidArgument for half a client key pair or a TLS
// file given without a CA; NotFound for a file that cannot be read.
// connect_timeout is clamped to [100 ms, 1 hour].
absl::StatusOr<std::shared_ptr<grpc::Channel>> OpenCoordinatorChannel(
    const std::string& address, const ClientSecurity& security,
    absl::Duration max_backoff = absl::Seconds(10),
    absl::Duration connect_timeout = kDefaultConnectTimeout);

// Plaintext, no token (benchmarks and tests on loopback).
std::shared_ptr<grpc::Channel> CreateCoordinatorChannel(
    const std::string& address, absl::Duration max_backoff = absl::Seconds(10),
    absl::Duration connect_timeout = kDefaultConnectTimeout);

}  // namespace skerry::worker

#endif  // SKERRY_WORKER_CHANNEL_H_
