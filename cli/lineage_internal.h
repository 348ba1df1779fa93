// Internal to the lineage commands of `skerry` (cli/lineage.h): what the
// files that implement them share. lineage.cc parses arguments and
// dispatches; lineage_text.cc formats genomes and JSON; lineage_queries.cc runs
// and prints the unary queries; lineage_stream.cc the streamed ones (ancestors,
// descendants) and the DOT export.
//
// Thread safety: as cli/lineage.h, one command at a time per Io.
#ifndef SKERRY_CLI_LINEAGE_INTERNAL_H_
#define SKERRY_CLI_LINEAGE_INTERNAL_H_

#include <cstdint>
#include <string>

#include "absl/status/status.h"
#include "absl/status/statusor.h"
#include "absl/strings/string_view.h"
#include "cli/args.h"
#include "cli/client.h"
#include "cli/commands.h"
#include "cli/lineage.h"
#include "google/protobuf/message.h"
#include "grpcpp/client_context.h"
#include "skerry/v1/lineage.grpc.pb.h"

namespace skerry::cli::lineage_internal {

using Stub = skerry::v1::LineageService::StubInterface;

// What one command needs: the parsed arguments, the stub and where to talk.
struct Call {
  const ParsedArgs& args;
  Stub& stub;
  const Confirm& confirm;
  Io& io;
  uint64_t confirm_rows;
  absl::Status Check(const grpc::Status& s, absl::string_view rpc) const {
    return FromGrpc(s, rpc, args.coordinator);
  }
};

// ---- Text (lineage_text.cc) ----

// "RUN/ISLAND/GENERATION/SLOT".
std::string Key(const skerry::v1::LineageNode& n);
// "#ID RUN/ISLAND/GENERATION/SLOT".
std::string Name(const skerry::v1::LineageNode& n);
// The score, or "failed" / "pending".
std::string ScoreText(const skerry::v1::LineageNode& n);
// One row of a genome table, fixed widths so that rows can be printed as they
// stream in; NodeHeader() is its header.
std::string NodeRow(const skerry::v1::LineageNode& n);
std::string NodeHeader();
// The deadline of a unary call.
void SetDeadline(grpc::ClientContext* ctx);

// ---- Unary queries (lineage_queries.cc) ----

int DescentCommand(const Call& call, const skerry::v1::GenomeRef& ref);
int CommonAncestorCommand(const Call& call, const skerry::v1::GenomeRef& a,
                          const skerry::v1::GenomeRef& b);
// TARGET is the first positional argument.
int CoalescenceCommand(const Call& call, uint32_t depth);
int AttributionCommand(const Call& call, const skerry::v1::GenomeRef& ref);

// ---- Streamed queries (lineage_stream.cc) ----

int AncestorsCommand(const Call& call, const skerry::v1::GenomeRef& ref,
                     uint32_t depth);
int DescendantsCommand(const Call& call, const skerry::v1::GenomeRef& ref,
                       uint32_t depth);

}  // namespace skerry::cli::lineage_internal

#endif  // SKERRY_CLI_LINEAGE_INTERNAL_H_
