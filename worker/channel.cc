#include "worker/channel.h"

#include <algorithm>
#include <cstdint>

#include "grpcpp/create_channel.h"
#include "grpcpp/security/credentials.h"
#include "grpcpp/support/channel_arguments.h"

namespace skerry::worker {

std::shared_ptr<grpc::Channel> CreateCoordinatorChannel(
    const std::string& address, absl::Duration max_backoff) {
  grpc::ChannelArguments args;
  const int64_t cap_ms =
      std::clamp<int64_t>(absl::ToInt64Milliseconds(max_backoff), 100, 120000);
  args.SetInt(GRPC_ARG_INITIAL_RECONNECT_BACKOFF_MS, 100);
  args.SetInt(GRPC_ARG_MIN_RECONNECT_BACKOFF_MS, 100);
  args.SetInt(GRPC_ARG_MAX_RECONNECT_BACKOFF_MS, static_cast<int>(cap_ms));
  // Leases and reports can carry many genomes.
  args.SetMaxReceiveMessageSize(256 << 20);
  args.SetMaxSendMessageSize(256 << 20);
  return grpc::CreateCustomChannel(address, grpc::InsecureChannelCredentials(),
                                   args);
}

}  // namespace skerry::worker
