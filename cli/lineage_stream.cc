// The streamed lineage commands: ancestors (also as a DOT graph) and
// descendants. Rows are printed as they arrive; past Call::confirm_rows they
// are held back until the user agrees (cli/lineage.h).
#include <optional>
#include <string>
#include <utility>
#include <vector>

#include "absl/strings/str_cat.h"
#include "cli/format.h"
#include "cli/lineage_internal.h"
#include "server/lineage/dot.h"

namespace skerry::cli::lineage_internal {

using skerry::v1::GenomeRef;
using skerry::v1::LineageChunk;
using skerry::v1::LineageNode;

namespace {

// Prints a stream's chunks as text or JSON lines, holding them back past
// kConfirmRows until the user agrees.
class StreamPrinter {
 public:
  StreamPrinter(const Call& call, absl::string_view what, bool keep)
      : call_(call), what_(what), keep_(keep), json_(call.args.Has("json")) {
    approved_ = call.args.Has("yes");
  }

  // False: stop reading (refused); `refusal_` says why.
  bool Add(LineageChunk chunk) {
    if (!have_head_) {
      head_ = chunk.genome();
      at_most_ = chunk.at_most();
      have_head_ = true;
      if (at_most_ <= call_.confirm_rows) approved_ = true;
    }
    rows_ += chunk.nodes_size();
    if (keep_) {
      for (LineageNode& n : *chunk.mutable_nodes())
        kept_.push_back(std::move(n));
    } else {
      held_.push_back(std::move(chunk));
    }
    if (!approved_ && rows_ > call_.confirm_rows && !Ask()) return false;
    if (approved_ && !keep_) Flush();
    return true;
  }
  // The stream ended: print whatever was held back.
  void Finish() {
    if (!keep_) Flush();
    if (!keep_ && !json_) {
      *call_.io.out << FormatCount(rows_) << " " << what_ << "\n" << std::flush;
    }
  }
  const absl::Status& refusal() const { return refusal_; }
  const LineageNode& head() const { return head_; }
  std::vector<LineageNode>& kept() { return kept_; }

 private:
  bool Ask() {
    const std::string size =
        absl::StrCat("more than ", FormatCount(call_.confirm_rows),
                     " genomes (at most ", FormatCount(at_most_), ")");
    std::optional<bool> yes =
        call_.confirm(absl::StrCat("the ", what_, " of ", Name(head_), " are ",
                                   size, "; print them all?"));
    if (yes.has_value() && *yes) {
      approved_ = true;
      return true;
    }
    refusal_ = absl::FailedPreconditionError(
        absl::StrCat(call_.args.command, ": ",
                     yes.has_value() ? "not printing " : "refusing to print ",
                     size, yes.has_value() ? "" : " without --yes",
                     "; limit the answer with --depth N"));
    return false;
  }
  void Flush() {
    for (LineageChunk& chunk : held_) {
      if (json_) {
        absl::StatusOr<std::string> text = MessageJson(chunk);
        *call_.io.out << (text.ok() ? *text : "{}\n");
        continue;
      }
      if (!printed_head_) {
        *call_.io.out << what_ << " of " << Name(head_) << " ("
                      << lineage::OriginLabel(head_.origin()) << ", score "
                      << ScoreText(head_) << "), at most "
                      << FormatCount(at_most_) << ":\n"
                      << NodeHeader();
        printed_head_ = true;
      }
      for (const LineageNode& n : chunk.nodes()) *call_.io.out << NodeRow(n);
    }
    held_.clear();
    *call_.io.out << std::flush;
  }

  const Call& call_;
  const std::string what_;
  const bool keep_;  // collect the nodes instead of printing (DOT)
  const bool json_;
  bool approved_ = false;
  bool have_head_ = false;
  bool printed_head_ = false;
  LineageNode head_;
  uint64_t at_most_ = 0;
  uint64_t rows_ = 0;
  std::vector<LineageChunk> held_;
  std::vector<LineageNode> kept_;
  absl::Status refusal_;
};

int DrainStream(grpc::ClientContext& ctx,
                grpc::ClientReaderInterface<LineageChunk>& reader,
                StreamPrinter& printer, const Call& call,
                absl::string_view rpc) {
  LineageChunk chunk;
  bool refused = false;
  while (reader.Read(&chunk)) {
    if (!printer.Add(std::move(chunk))) {
      refused = true;
      ctx.TryCancel();
      break;
    }
    chunk.Clear();
  }
  grpc::Status status = reader.Finish();
  if (refused) {
    *call.io.err << "skerry: " << printer.refusal().message() << "\n";
    return kExitFailure;
  }
  absl::Status s = call.Check(status, rpc);
  if (!s.ok()) return ReportError(s, call.io);
  printer.Finish();
  return kExitOk;
}

int DotAncestors(const Call& call, StreamPrinter& printer, uint32_t depth) {
  grpc::ClientContext ctx;
  SetDeadline(&ctx);
  skerry::v1::LineOfDescentRequest request;
  request.mutable_genome()->set_id(printer.head().id());
  skerry::v1::LineOfDescentResponse line;
  absl::Status s = call.Check(call.stub.GetLineOfDescent(&ctx, request, &line),
                              "GetLineOfDescent");
  if (!s.ok()) return ReportError(s, call.io);
  std::vector<LineageNode> steps(line.steps().begin(), line.steps().end());
  const std::string title =
      absl::StrCat("ancestry of ", Name(printer.head()), ", ", depth,
                   " generations; bold: line of descent");
  *call.io.out << lineage::AncestryDot(printer.head(), printer.kept(), steps,
                                       title)
               << std::flush;
  return kExitOk;
}

}  // namespace

int AncestorsCommand(const Call& call, const GenomeRef& ref, uint32_t depth) {
  const bool dot = call.args.Has("dot");
  if (dot && call.args.Has("json")) {
    *call.io.err << "skerry: ancestors: --dot and --json exclude each other\n";
    return kExitUsage;
  }
  if (dot && depth == 0) depth = kDefaultDotDepth;
  skerry::v1::AncestorsRequest request;
  *request.mutable_genome() = ref;
  request.set_max_depth(depth);
  grpc::ClientContext ctx;
  auto reader = call.stub.StreamAncestors(&ctx, request);
  StreamPrinter printer(call, "ancestors", dot);
  int code = DrainStream(ctx, *reader, printer, call, "StreamAncestors");
  if (code != kExitOk || !dot) return code;
  return DotAncestors(call, printer, depth);
}

int DescendantsCommand(const Call& call, const GenomeRef& ref, uint32_t depth) {
  skerry::v1::DescendantsRequest request;
  *request.mutable_genome() = ref;
  request.set_max_depth(depth);
  grpc::ClientContext ctx;
  auto reader = call.stub.StreamDescendants(&ctx, request);
  StreamPrinter printer(call, "descendants", false);
  return DrainStream(ctx, *reader, printer, call, "StreamDescendants");
}

}  // namespace skerry::cli::lineage_internal
