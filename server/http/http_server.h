// HttpServer: the coordinator's read-only web port (`--http HOST:PORT`, off by
// default), served with cpp-httplib (Debian's libcpp-httplib-dev):
//
//   GET /              the live page (server/http/report_page.h): a shell of
//                      HTML and script with no data in it; its script reads
//                      the rest with the token it was given (#token=...)
//   GET /api/runs      RunService.ListRuns, in protobuf's JSON mapping
//   GET /api/report?run=N   one run's report data (as `skerry report` embeds)
//   GET /api/fleet     gauges and AdminService.ListWorkers
//   GET /metrics       Prometheus text exposition format 0.0.4
//
// Access: every path but / needs "Authorization: Bearer TOKEN" when access
// control is on, decided by AccessControl::Admit as for the gRPC method
// RunService.ListRuns (any role that may read runs; a viewer's token is
// enough); the data then comes through the coordinator's in-process gRPC
// channel with the same token, so the gRPC rules decide every answer. With
// TLS configured the port serves HTTPS with the gRPC port's certificate and
// key, and asks for client certificates when the gRPC port does.
//
// Invariant: nothing served here changes anything stored.
// Thread safety: Start once; Shutdown from any thread (the destructor calls
// it). Requests are served on the server's own threads.
#ifndef SKERRY_SERVER_HTTP_HTTP_SERVER_H_
#define SKERRY_SERVER_HTTP_HTTP_SERVER_H_

#include <functional>
#include <memory>
#include <string>

#include "absl/status/statusor.h"
#include "grpcpp/channel.h"
#include "server/auth/access_control.h"
#include "server/http/fleet_metrics.h"

namespace skerry::http {

struct HttpOptions {
  std::string address;  // HOST:PORT; port 0 picks a free one
  std::string chart_library_path;
  // The gRPC port's TLS files; HTTPS when cert and key are both set.
  std::string tls_cert_file;
  std::string tls_key_file;
  std::string tls_client_ca_file;
};

struct HttpSources {
  std::shared_ptr<grpc::Channel> channel;  // in-process, to this coordinator
  auth::AccessControl* access = nullptr;
  std::function<absl::StatusOr<CoordinatorGauges>()> gauges;
  std::function<FleetMetrics::Snapshot()> counts;
};

class HttpServer {
 public:
  // InvalidArgument for a bad address; NotFound without the charting
  // library; Unavailable when the port cannot be bound.
  static absl::StatusOr<std::unique_ptr<HttpServer>> Start(
      const HttpOptions& options, HttpSources sources);
  virtual ~HttpServer() = default;

  virtual int port() const = 0;
  virtual bool tls() const = 0;
  // Stops accepting and waits for the serving thread.
  virtual void Shutdown() = 0;
};

}  // namespace skerry::http

#endif  // SKERRY_SERVER_HTTP_HTTP_SERVER_H_
