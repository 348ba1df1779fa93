// Export of a decoded network as self-contained JSON, readable without Skerry.
//
// The format ("skerry-network" version 1) is specified in
// docs/network-format.md: the input count, the biases and recurrence flags,
// then per layer its size, activation name and weights as nested arrays (one
// row per neuron), numbers written with 17 significant digits so that a reader
// gets the very doubles back. Optional notes (string pairs, e.g. run name and
// score) ride along.
//
// Invariant: the output is valid JSON (RFC 8259) and decodes to the same
// network, weight for weight.
// Thread safety: pure functions, safe from any thread.
//
//   absl::StatusOr<std::string> json =
//       ExportNetworkJson(spec.evaluator().network(), champion_genes,
//                         {{"run", "cart-rig"}, {"score", "100000"}});
#ifndef SKERRY_COMMON_NETWORK_EXPORT_H_
#define SKERRY_COMMON_NETWORK_EXPORT_H_

#include <string>
#include <utility>
#include <vector>

#include "absl/status/statusor.h"
#include "absl/types/span.h"
#include "common/network.h"
#include "skerry/v1/control.pb.h"

namespace skerry {

using ExportNotes = std::vector<std::pair<std::string, std::string>>;

// The network as JSON text (ends with a newline).
std::string NetworkToJson(const Network& network,
                          const ExportNotes& notes = {});

// Decodes `genes` with `spec`, then NetworkToJson. InvalidArgument as
// Network::Decode.
absl::StatusOr<std::string> ExportNetworkJson(
    const skerry::v1::NetworkSpec& spec, absl::Span<const double> genes,
    const ExportNotes& notes = {});

}  // namespace skerry

#endif  // SKERRY_COMMON_NETWORK_EXPORT_H_
