// Formatting shared by the lineage commands: genomes as text, answers as
// JSON, the unary deadline.
#include <string>

#include "absl/strings/str_cat.h"
#include "absl/strings/str_format.h"
#include "absl/time/clock.h"
#include "cli/client.h"
#include "cli/format.h"
#include "cli/lineage_internal.h"
#include "server/lineage/dot.h"

namespace skerry::cli::lineage_internal {

using skerry::v1::LineageNode;

std::string Key(const LineageNode& n) {
  return absl::StrCat(n.key().run_id(), "/", n.key().island(), "/",
                      n.key().generation(), "/", n.key().slot());
}

std::string Name(const LineageNode& n) {
  return absl::StrCat("#", n.id(), " ", Key(n));
}

std::string ScoreText(const LineageNode& n) {
  if (n.state() == skerry::v1::FAILED) return "failed";
  if (n.state() != skerry::v1::EVALUATED) return "pending";
  return FormatScore(n.score());
}

namespace {

constexpr absl::Duration kUnaryDeadline = absl::Minutes(2);

std::string Parent(uint64_t id) {
  return id == 0 ? "-" : absl::StrCat("#", id);
}

}  // namespace

std::string NodeRow(const LineageNode& n) {
  return absl::StrFormat("%10s  %-16s  %-9s  %12s  %10s  %10s\n",
                         absl::StrCat("#", n.id()), Key(n),
                         lineage::OriginLabel(n.origin()), ScoreText(n),
                         Parent(n.parent_a()), Parent(n.parent_b()));
}

std::string NodeHeader() {
  return absl::StrFormat("%10s  %-16s  %-9s  %12s  %10s  %10s\n", "id",
                         "genome", "origin", "score", "parent a", "parent b");
}

void SetDeadline(grpc::ClientContext* ctx) {
  ctx->set_deadline(
      absl::ToChronoTime(absl::Now() + CallDeadline(kUnaryDeadline)));
}

}  // namespace skerry::cli::lineage_internal
