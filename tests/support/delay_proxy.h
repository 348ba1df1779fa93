// A TCP proxy on 127.0.0.1 that delays every byte by a fixed one-way latency
// in each direction: a slow link between buildings, made on loopback. Tests
// point a client at address() instead of the coordinator's.
//
// Invariant: bytes arrive in order, each no earlier than `latency` after the
// proxy read it; nothing is dropped while both ends are open. A connection
// ends (both sides shut down) when either end closes or fails.
// Bounds: at most kMaxConnections connections over the proxy's life; every
// thread polls with a short timeout and stops when the proxy is destroyed.
//
// Thread safety: Start and the destructor from one thread; the proxy serves
// connections on threads of its own.
#ifndef SKERRY_TESTS_SUPPORT_DELAY_PROXY_H_
#define SKERRY_TESTS_SUPPORT_DELAY_PROXY_H_

#include <atomic>
#include <memory>
#include <string>
#include <thread>
#include <vector>

#include "absl/status/statusor.h"
#include "absl/synchronization/mutex.h"
#include "absl/time/time.h"

namespace skerry::testing {

class DelayProxy {
 public:
  static constexpr int kMaxConnections = 64;

  // Listens on 127.0.0.1 port 0 and forwards to 127.0.0.1:target_port.
  static absl::StatusOr<std::unique_ptr<DelayProxy>> Start(
      int target_port, absl::Duration latency);
  ~DelayProxy();
  DelayProxy(const DelayProxy&) = delete;
  DelayProxy& operator=(const DelayProxy&) = delete;

  std::string address() const;  // "127.0.0.1:PORT"
  int connections() const { return connections_.load(); }

 private:
  DelayProxy(int listen_fd, int port, int target_port, absl::Duration latency)
      : listen_fd_(listen_fd),
        port_(port),
        target_port_(target_port),
        latency_(latency) {}
  void AcceptLoop();
  // Copies from `from` to `to`, each chunk `latency_` after it was read.
  void Pump(int from, int to);

  const int listen_fd_;
  const int port_;
  const int target_port_;
  const absl::Duration latency_;
  std::atomic<bool> stopping_{false};
  std::atomic<int> connections_{0};
  std::thread acceptor_;
  absl::Mutex mu_;
  std::vector<std::thread> pumps_ ABSL_GUARDED_BY(mu_);
  std::vector<int> fds_ ABSL_GUARDED_BY(mu_);
};

}  // namespace skerry::testing

#endif  // SKERRY_TESTS_SUPPORT_DELAY_PROXY_H_
