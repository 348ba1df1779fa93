#include "tests/support/delay_proxy.h"

#include <arpa/inet.h>
#include <netinet/in.h>
#include <netinet/tcp.h>
#include <poll.h>
#include <sys/socket.h>
#include <unistd.h>

#include <cerrno>
#include <cstring>
#include <deque>
#include <string>
#include <utility>

#include "absl/strings/str_cat.h"
#include "absl/time/clock.h"

namespace skerry::testing {
namespace {

constexpr int kPollMs = 20;  // how soon a thread notices the proxy stopping

sockaddr_in Loopback(int port) {
  sockaddr_in a{};
  a.sin_family = AF_INET;
  a.sin_port = htons(static_cast<uint16_t>(port));
  a.sin_addr.s_addr = htonl(INADDR_LOOPBACK);
  return a;
}

// Writes all of `data`; false when the peer is gone.
bool WriteAll(int fd, const std::string& data) {
  size_t done = 0;
  while (done < data.size()) {
    ssize_t n = send(fd, data.data() + done, data.size() - done, MSG_NOSIGNAL);
    if (n < 0 && errno == EINTR) continue;
    if (n <= 0) return false;
    done += static_cast<size_t>(n);
  }
  return true;
}

}  // namespace

absl::StatusOr<std::unique_ptr<DelayProxy>> DelayProxy::Start(
    int target_port, absl::Duration latency) {
  int fd = socket(AF_INET, SOCK_STREAM | SOCK_CLOEXEC, 0);
  if (fd < 0) return absl::InternalError("socket failed");
  sockaddr_in a = Loopback(0);
  socklen_t len = sizeof(a);
  if (bind(fd, reinterpret_cast<sockaddr*>(&a), sizeof(a)) != 0 ||
      listen(fd, 16) != 0 ||
      getsockname(fd, reinterpret_cast<sockaddr*>(&a), &len) != 0) {
    const std::string why = std::strerror(errno);
    close(fd);
    return absl::InternalError(absl::StrCat("proxy listen: ", why));
  }
  std::unique_ptr<DelayProxy> proxy(
      new DelayProxy(fd, ntohs(a.sin_port), target_port, latency));
  proxy->acceptor_ = std::thread([p = proxy.get()] { p->AcceptLoop(); });
  return proxy;
}

DelayProxy::~DelayProxy() {
  stopping_ = true;
  if (acceptor_.joinable()) acceptor_.join();
  std::vector<std::thread> pumps;
  {
    absl::MutexLock l(&mu_);
    for (int fd : fds_) shutdown(fd, SHUT_RDWR);
    pumps.swap(pumps_);
  }
  for (std::thread& t : pumps) t.join();
  absl::MutexLock l(&mu_);
  for (int fd : fds_) close(fd);
  close(listen_fd_);
}

std::string DelayProxy::address() const {
  return absl::StrCat("127.0.0.1:", port_);
}

void DelayProxy::AcceptLoop() {
  while (!stopping_ && connections_ < kMaxConnections) {
    pollfd p{listen_fd_, POLLIN, 0};
    if (poll(&p, 1, kPollMs) <= 0) continue;
    int client = accept4(listen_fd_, nullptr, nullptr, SOCK_CLOEXEC);
    if (client < 0) continue;
    int server = socket(AF_INET, SOCK_STREAM | SOCK_CLOEXEC, 0);
    sockaddr_in target = Loopback(target_port_);
    if (server < 0 || connect(server, reinterpret_cast<sockaddr*>(&target),
                              sizeof(target)) != 0) {
      close(client);
      if (server >= 0) close(server);
      continue;
    }
    for (int fd : {client, server}) {
      int one = 1;
      setsockopt(fd, IPPROTO_TCP, TCP_NODELAY, &one, sizeof(one));
    }
    ++connections_;
    absl::MutexLock l(&mu_);
    fds_.push_back(client);
    fds_.push_back(server);
    pumps_.emplace_back([this, client, server] { Pump(client, server); });
    pumps_.emplace_back([this, client, server] { Pump(server, client); });
  }
}

void DelayProxy::Pump(int from, int to) {
  // Chunks read and the time each may be passed on.
  std::deque<std::pair<absl::Time, std::string>> queue;
  bool open = true;
  while (!stopping_ && (open || !queue.empty())) {
    const absl::Time now = absl::Now();
    while (!queue.empty() && queue.front().first <= now) {
      if (!WriteAll(to, queue.front().second)) {
        open = false;
        queue.clear();
        break;
      }
      queue.pop_front();
    }
    int wait_ms = kPollMs;
    if (!queue.empty()) {
      wait_ms = std::min<int64_t>(
          kPollMs, absl::ToInt64Milliseconds(queue.front().first - now) + 1);
    }
    if (!open) {
      if (!queue.empty()) absl::SleepFor(absl::Milliseconds(wait_ms));
      continue;
    }
    pollfd p{from, POLLIN, 0};
    if (poll(&p, 1, wait_ms) <= 0) continue;
    char buf[16384];
    ssize_t n = recv(from, buf, sizeof(buf), 0);
    if (n < 0 && errno == EINTR) continue;
    if (n <= 0) {
      open = false;
      continue;
    }
    queue.emplace_back(absl::Now() + latency_,
                       std::string(buf, static_cast<size_t>(n)));
  }
  // This direction is over: pass the end on after the data.
  shutdown(to, SHUT_WR);
  shutdown(from, SHUT_RD);
}

}  // namespace skerry::testing
