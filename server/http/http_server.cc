// The one file that includes cpp-httplib. Debian builds it as a library with
// OpenSSL; its pkg-config flags define CPPHTTPLIB_OPENSSL_SUPPORT, which makes
// httplib::SSLServer available here.
#include "server/http/http_server.h"

#include <httplib.h>

#ifndef CPPHTTPLIB_OPENSSL_SUPPORT
#error "cpp-httplib without OpenSSL: HTTPS would be impossible"
#endif

#include <memory>
#include <thread>

#include "absl/strings/numbers.h"
#include "absl/strings/str_cat.h"
#include "absl/synchronization/mutex.h"
#include "common/status_macros.h"
#include "google/protobuf/struct.pb.h"
#include "google/protobuf/util/json_util.h"
#include "server/api/grpc_status.h"
#include "server/http/report_data.h"
#include "server/http/report_page.h"
#include "skerry/v1/admin.grpc.pb.h"

namespace skerry::http {
namespace {

// The gRPC method whose rule decides who may read over HTTP.
constexpr char kReadMethod[] = "/skerry.v1.RunService/ListRuns";
constexpr size_t kServingThreads = 4;
constexpr absl::Duration kCallDeadline = absl::Seconds(30);

// The page fetches only from this origin and runs only its inline scripts.
constexpr char kPagePolicy[] =
    "default-src 'none'; script-src 'unsafe-inline'; style-src "
    "'unsafe-inline'; connect-src 'self'; img-src data:";

int HttpCode(grpc::StatusCode code) {
  switch (code) {
    case grpc::StatusCode::UNAUTHENTICATED:
      return 401;
    case grpc::StatusCode::PERMISSION_DENIED:
      return 403;
    case grpc::StatusCode::NOT_FOUND:
      return 404;
    case grpc::StatusCode::INVALID_ARGUMENT:
      return 400;
    case grpc::StatusCode::UNAVAILABLE:
    case grpc::StatusCode::RESOURCE_EXHAUSTED:
      return 503;
    default:
      return 500;
  }
}

void Fail(httplib::Response& res, int code, absl::string_view message) {
  res.status = code;
  if (code == 401) res.set_header("WWW-Authenticate", "Bearer");
  res.set_content(absl::StrCat(message, "\n"), "text/plain; charset=utf-8");
}

void Fail(httplib::Response& res, const absl::Status& s) {
  Fail(res, HttpCode(static_cast<grpc::StatusCode>(s.code())), s.message());
}

absl::StatusOr<std::string> Json(const google::protobuf::Message& m) {
  google::protobuf::util::JsonPrintOptions options;
  options.always_print_primitive_fields = true;
  std::string out;
  auto s = google::protobuf::util::MessageToJsonString(m, &out, options);
  if (!s.ok()) return absl::InternalError(s.ToString());
  return out;
}

absl::Status SplitAddress(const std::string& address, std::string* host,
                          int* port) {
  const size_t colon = address.rfind(':');
  if (colon == std::string::npos || colon == 0 ||
      !absl::SimpleAtoi(address.substr(colon + 1), port) || *port < 0 ||
      *port > 65535) {
    return absl::InvalidArgumentError(absl::StrCat(
        "--http: expected HOST:PORT with a port from 0 to 65535, got '",
        address, "'"));
  }
  *host = address.substr(0, colon);
  if (host->size() > 2 && host->front() == '[' && host->back() == ']') {
    *host = host->substr(1, host->size() - 2);
  }
  return absl::OkStatus();
}

class HttpServerImpl final : public HttpServer {
 public:
  HttpServerImpl(HttpSources sources, std::string chart_library)
      : sources_(std::move(sources)),
        page_(RenderLivePage(chart_library)),
        runs_(skerry::v1::RunService::NewStub(sources_.channel)),
        lineage_(skerry::v1::LineageService::NewStub(sources_.channel)),
        admin_(skerry::v1::AdminService::NewStub(sources_.channel)) {}

  ~HttpServerImpl() override { Shutdown(); }

  absl::Status Listen(const HttpOptions& options) {
    std::string host;
    int port = 0;
    SKERRY_RETURN_IF_ERROR(SplitAddress(options.address, &host, &port));
    if (!options.tls_cert_file.empty() && !options.tls_key_file.empty()) {
      server_ = std::make_unique<httplib::SSLServer>(
          options.tls_cert_file.c_str(), options.tls_key_file.c_str(),
          options.tls_client_ca_file.empty()
              ? nullptr
              : options.tls_client_ca_file.c_str());
      tls_ = true;
    } else {
      server_ = std::make_unique<httplib::Server>();
    }
    if (!server_->is_valid()) {
      return absl::InvalidArgumentError(
          "--http: cannot load the TLS certificate and key for HTTPS");
    }
    server_->new_task_queue = [] {
      return new httplib::ThreadPool(kServingThreads);
    };
    server_->set_payload_max_length(1 << 16);  // no request needs a body
    server_->set_read_timeout(10);
    Routes();
    port_ = port == 0 ? server_->bind_to_any_port(host)
                      : (server_->bind_to_port(host, port) ? port : -1);
    if (port_ <= 0) {
      return absl::UnavailableError(absl::StrCat(
          "--http: cannot listen on ", options.address,
          " (address in use, or not an address of this machine?)"));
    }
    thread_ = std::thread([this] { server_->listen_after_bind(); });
    return absl::OkStatus();
  }

  int port() const override { return port_; }
  bool tls() const override { return tls_; }

  void Shutdown() override {
    absl::MutexLock l(&mu_);
    if (server_ != nullptr) server_->stop();
    if (thread_.joinable()) thread_.join();
  }

 private:
  // The caller's Authorization header, checked; empty std::optional (and
  // `res` filled) when refused.
  std::optional<std::string> Admit(const httplib::Request& req,
                                   httplib::Response& res) {
    std::vector<std::string> authorization;
    if (req.has_header("Authorization")) {
      authorization.push_back(req.get_header_value("Authorization"));
    }
    auth::Verdict v = sources_.access->Admit(kReadMethod, authorization);
    if (!v.status.ok()) {
      Fail(res, HttpCode(v.status.error_code()), v.status.error_message());
      return std::nullopt;
    }
    return authorization.empty() ? std::string() : authorization.front();
  }

  PrepareCall Prepare(const std::string& authorization) const {
    return [authorization](grpc::ClientContext* ctx) {
      if (!authorization.empty()) {
        ctx->AddMetadata("authorization", authorization);
      }
    };
  }

  // A call on the caller's behalf: their authorization and the deadline.
  std::unique_ptr<grpc::ClientContext> CallContext(
      const std::string& authorization) const {
    auto ctx = std::make_unique<grpc::ClientContext>();
    ctx->set_deadline(absl::ToChronoTime(absl::Now() + kCallDeadline));
    Prepare(authorization)(ctx.get());
    return ctx;
  }

  void SendJson(httplib::Response& res, const absl::StatusOr<std::string>& j) {
    if (!j.ok()) return Fail(res, j.status());
    res.set_header("Cache-Control", "no-store");
    res.set_content(*j, "application/json");
  }

  void Routes() {
    server_->Get("/", [this](const httplib::Request&, httplib::Response& res) {
      res.set_header("Content-Security-Policy", kPagePolicy);
      res.set_header("Cache-Control", "no-store");
      res.set_content(page_, "text/html; charset=utf-8");
    });
    server_->Get("/api/runs", [this](const httplib::Request& req,
                                     httplib::Response& res) {
      std::optional<std::string> token = Admit(req, res);
      if (!token) return;
      skerry::v1::ListRunsResponse runs;
      grpc::Status s = runs_->ListRuns(CallContext(*token).get(), {}, &runs);
      if (!s.ok()) return Fail(res, api::FromGrpc(s));
      SendJson(res, Json(runs));
    });
    server_->Get("/api/report", [this](const httplib::Request& req,
                                       httplib::Response& res) {
      std::optional<std::string> token = Admit(req, res);
      if (!token) return;
      uint64_t run = 0;
      if (!absl::SimpleAtoi(req.get_param_value("run"), &run) || run == 0) {
        return Fail(res, 400, "run: expected ?run=N with a run id");
      }
      absl::StatusOr<RunReportData> data =
          FetchReportData(*runs_, *lineage_, run, Prepare(*token));
      if (!data.ok()) return Fail(res, data.status());
      absl::StatusOr<std::string> all = ReportJson({*std::move(data)});
      if (!all.ok()) return Fail(res, all.status());
      // One run: the array's only element.
      SendJson(res, all->substr(1, all->size() - 2));
    });
    server_->Get("/api/fleet", [this](const httplib::Request& req,
                                      httplib::Response& res) {
      std::optional<std::string> token = Admit(req, res);
      if (!token) return;
      skerry::v1::ListWorkersResponse workers;
      grpc::Status s =
          admin_->ListWorkers(CallContext(*token).get(), {}, &workers);
      if (!s.ok()) return Fail(res, api::FromGrpc(s));
      absl::StatusOr<CoordinatorGauges> g = sources_.gauges();
      if (!g.ok()) return Fail(res, g.status());
      absl::StatusOr<std::string> list = Json(workers);
      if (!list.ok()) return Fail(res, list.status());
      size_t queued = 0;
      for (const auto& [run, n] : g->queued_by_run) queued += n;
      std::string storage =
          g->storage_problem.empty() ? "ok" : "held: " + g->storage_problem;
      SendJson(res,
               absl::StrCat("{\"storage\":", JsonString(storage),
                            ",\"workersSeen\":", g->workers_connected,
                            ",\"queued\":", queued,
                            ",\"leased\":", g->leases_outstanding,
                            ",\"databaseBytes\":", g->database_bytes,
                            ",\"storageFreeBytes\":", g->storage_free_bytes,
                            ",\"list\":", *list, "}"));
    });
    server_->Get("/metrics",
                 [this](const httplib::Request& req, httplib::Response& res) {
                   std::optional<std::string> token = Admit(req, res);
                   if (!token) return;
                   absl::StatusOr<CoordinatorGauges> g = sources_.gauges();
                   if (!g.ok()) return Fail(res, g.status());
                   res.set_content(MetricsText(sources_.counts(), *g),
                                   "text/plain; version=0.0.4; charset=utf-8");
                 });
  }

  static std::string JsonString(absl::string_view s) {
    google::protobuf::Value v;
    v.set_string_value(std::string(s));
    std::string out;
    if (!google::protobuf::util::MessageToJsonString(v, &out).ok()) {
      return "\"\"";
    }
    return out;
  }

  const HttpSources sources_;
  const std::string page_;
  const std::unique_ptr<skerry::v1::RunService::Stub> runs_;
  const std::unique_ptr<skerry::v1::LineageService::Stub> lineage_;
  const std::unique_ptr<skerry::v1::AdminService::Stub> admin_;
  std::unique_ptr<httplib::Server> server_;
  bool tls_ = false;
  int port_ = 0;
  absl::Mutex mu_;  // one Shutdown at a time
  std::thread thread_;
};

}  // namespace

absl::StatusOr<std::unique_ptr<HttpServer>> HttpServer::Start(
    const HttpOptions& options, HttpSources sources) {
  SKERRY_ASSIGN_OR_RETURN(std::string library,
                          LoadChartLibrary(options.chart_library_path));
  auto server =
      std::make_unique<HttpServerImpl>(std::move(sources), std::move(library));
  SKERRY_RETURN_IF_ERROR(server->Listen(options));
  return server;
}

}  // namespace skerry::http
