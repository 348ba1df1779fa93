// The one place where the worker's channel to the coordinator is made, so that
// transport security (a later issue) changes one function.
//
// The channel's own reconnect backoff is capped at max_backoff, so a restarted
// coordinator is found again about as fast as the worker's RPC retries expect.
//
// Thread safety: a pure function; the returned channel may be shared by
// threads.
#ifndef SKERRY_WORKER_CHANNEL_H_
#define SKERRY_WORKER_CHANNEL_H_

#include <memory>
#include <string>

#include "absl/time/time.h"
#include "grpcpp/channel.h"

namespace skerry::worker {

// address is HOST:PORT. Insecure credentials for now.
std::shared_ptr<grpc::Channel> CreateCoordinatorChannel(
    const std::string& address, absl::Duration max_backoff = absl::Seconds(10));

}  // namespace skerry::worker

#endif  // SKERRY_WORKER_CHANNEL_H_
