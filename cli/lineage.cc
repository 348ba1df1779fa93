#include "cli/lineage.h"

#include <unistd.h>

#include <algorithm>
#include <iostream>
#include <utility>

#include "absl/strings/ascii.h"
#include "absl/strings/numbers.h"
#include "absl/strings/str_cat.h"
#include "absl/strings/str_format.h"
#include "absl/strings/str_join.h"
#include "absl/strings/str_split.h"
#include "absl/time/clock.h"
#include "cli/client.h"
#include "cli/format.h"
#include "google/protobuf/util/json_util.h"
#include "grpcpp/client_context.h"
#include "grpcpp/create_channel.h"
#include "grpcpp/security/credentials.h"
#include "server/lineage/dot.h"

namespace skerry::cli {
namespace {

using skerry::v1::GenomeRef;
using skerry::v1::LineageChunk;
using skerry::v1::LineageNode;
using Stub = skerry::v1::LineageService::StubInterface;

constexpr absl::Duration kUnaryDeadline = absl::Minutes(2);
constexpr char kGenomeHelp[] =
    " GENOME is ID, #ID, RUN/ISLAND/GENERATION/SLOT (e.g. 3/0/12/5) or "
    "RUN/best (the run's champion).";

const FlagSpec kJson = {"json", nullptr,
                        "print protobuf's JSON mapping of the answer"};
const FlagSpec kDepth = {"depth", "N", "at most N generations away"};
const FlagSpec kYes = {"yes", nullptr,
                       "print answers of any size without asking"};

}  // namespace

std::vector<CommandSpec> LineageCommandSpecs() {
  static const std::string ancestors = absl::StrCat(
      "Prints the ancestors of GENOME, newest generation first: every genome "
      "it descends from, to --depth generations back (default: all the way). "
      "A late genome's full ancestry covers most of the run: past ",
      FormatCount(kConfirmRows),
      " genomes you are asked first (--yes to skip). --json prints the "
      "streamed messages, one per line. --dot prints a Graphviz graph (depth ",
      kDefaultDotDepth,
      " unless --depth says otherwise): nodes coloured by island, edges "
      "labelled by origin, the line of descent in bold.",
      kGenomeHelp);
  static const std::string descent = absl::StrCat(
      "Prints the line of descent of GENOME: the single chain back to its "
      "founder (generation 0 or an immigrant) through the fitter parent "
      "(a scored parent beats a failed one; ties and single parents go to "
      "parent a), with each step's score and gain.",
      kGenomeHelp);
  static const std::string descendants = absl::StrCat(
      "Prints the descendants of GENOME, oldest generation first, to --depth "
      "generations forward (default: all). Large answers are confirmed as "
      "for ancestors.",
      kGenomeHelp);
  static const std::string common = absl::StrCat(
      "Prints the most recent common ancestors of two genomes: the common "
      "ancestors of the newest generation that has any (a genome counts as "
      "its own ancestor).",
      kGenomeHelp);
  static const std::string coalescence = absl::StrCat(
      "Prints, per generation back, how many distinct ancestors TARGET has "
      "and on how many islands: how fast its ancestry coalesces. TARGET is a "
      "GENOME, or a population RUN/ISLAND/GENERATION or RUN/*/GENERATION "
      "(every island).",
      kGenomeHelp);
  static const std::string attribution = absl::StrCat(
      "Along the line of descent of GENOME, which origin (crossover, "
      "mutation, migrant, immigrant, elite) made each improvement of the "
      "score and by how much (each step against the parent the line goes "
      "through), and where the line crossed between islands.",
      kGenomeHelp);
  return {
      {"ancestors",
       {"GENOME"},
       {kDepth,
        kJson,
        {"dot", nullptr, "print a Graphviz DOT graph of the ancestry"},
        kYes},
       "print a genome's ancestors (stream; asks before huge answers)",
       ancestors.c_str()},
      {"descent",
       {"GENOME"},
       {kJson},
       "print a genome's line of descent back to its founder",
       descent.c_str()},
      {"descendants",
       {"GENOME"},
       {kDepth, kJson, kYes},
       "print a genome's descendants",
       descendants.c_str()},
      {"common-ancestor",
       {"GENOME", "GENOME"},
       {kJson},
       "print the most recent common ancestors of two genomes",
       common.c_str()},
      {"coalescence",
       {"TARGET"},
       {kDepth, kJson},
       "count distinct ancestors per generation of a genome or population",
       coalescence.c_str()},
      {"attribution",
       {"GENOME"},
       {kJson},
       "which origins and islands made a genome's improvements",
       attribution.c_str()},
  };
}

bool IsLineageCommand(absl::string_view command) {
  for (const char* name : {"ancestors", "descent", "descendants",
                           "common-ancestor", "coalescence", "attribution"}) {
    if (command == name) return true;
  }
  return false;
}

namespace {

absl::StatusOr<std::vector<uint64_t>> Numbers(absl::string_view text,
                                              absl::string_view what) {
  std::vector<uint64_t> out;
  for (absl::string_view part : absl::StrSplit(text, '/')) {
    uint64_t v = 0;
    bool digits = !part.empty() &&
                  std::all_of(part.begin(), part.end(), absl::ascii_isdigit);
    if (!digits || !absl::SimpleAtoi(part, &v) || v > UINT32_MAX) {
      return absl::InvalidArgumentError(absl::StrCat(
          "'", text, "' is not ", what, " ('", part, "' is not a number)"));
    }
    out.push_back(v);
  }
  return out;
}

}  // namespace

absl::StatusOr<GenomeRef> ParseGenomeRef(absl::string_view text) {
  constexpr char kWhat[] =
      "a genome: ID, #ID, RUN/ISLAND/GENERATION/SLOT or RUN/best";
  GenomeRef ref;
  absl::string_view t = text;
  if (absl::ConsumePrefix(&t, "#") || t.find('/') == absl::string_view::npos) {
    uint64_t id = 0;
    bool digits =
        !t.empty() && std::all_of(t.begin(), t.end(), absl::ascii_isdigit);
    if (!digits || !absl::SimpleAtoi(t, &id) || id == 0) {
      return absl::InvalidArgumentError(
          absl::StrCat("'", text, "' is not ", kWhat));
    }
    ref.set_id(id);
    return ref;
  }
  if (absl::EndsWith(t, "/best")) {
    absl::StatusOr<std::vector<uint64_t>> run =
        Numbers(t.substr(0, t.size() - 5), kWhat);
    if (!run.ok() || run->size() != 1 || (*run)[0] == 0) {
      return absl::InvalidArgumentError(
          absl::StrCat("'", text, "' is not ", kWhat));
    }
    ref.set_champion_of_run((*run)[0]);
    return ref;
  }
  absl::StatusOr<std::vector<uint64_t>> parts = Numbers(t, kWhat);
  if (!parts.ok()) return parts.status();
  if (parts->size() != 4 || (*parts)[0] == 0) {
    return absl::InvalidArgumentError(absl::StrCat(
        "'", text, "' is not ", kWhat, " (a key has 4 parts, the run > 0)"));
  }
  ref.mutable_key()->set_run_id((*parts)[0]);
  ref.mutable_key()->set_island(static_cast<uint32_t>((*parts)[1]));
  ref.mutable_key()->set_generation(static_cast<uint32_t>((*parts)[2]));
  ref.mutable_key()->set_slot(static_cast<uint32_t>((*parts)[3]));
  return ref;
}

absl::StatusOr<skerry::v1::PopulationRef> ParsePopulationRef(
    absl::string_view text) {
  constexpr char kWhat[] =
      "a population: RUN/ISLAND/GENERATION or RUN/*/GENERATION";
  std::vector<std::string> parts = absl::StrSplit(text, '/');
  skerry::v1::PopulationRef p;
  if (parts.size() == 3 && parts[1] == "*") {
    parts[1] = "0";
    p.set_all_islands(true);
  }
  absl::StatusOr<std::vector<uint64_t>> n =
      parts.size() == 3 ? Numbers(absl::StrJoin(parts, "/"), kWhat)
                        : absl::StatusOr<std::vector<uint64_t>>(
                              absl::InvalidArgumentError(""));
  if (!n.ok() || (*n)[0] == 0) {
    return absl::InvalidArgumentError(
        absl::StrCat("'", text, "' is not ", kWhat));
  }
  p.set_run_id((*n)[0]);
  p.set_island(static_cast<uint32_t>((*n)[1]));
  p.set_generation(static_cast<uint32_t>((*n)[2]));
  return p;
}

LineageStubFactory NetworkLineageStubs() {
  return [](const std::string& target) -> std::unique_ptr<Stub> {
    return skerry::v1::LineageService::NewStub(
        grpc::CreateChannel(target, grpc::InsecureChannelCredentials()));
  };
}

Confirm TerminalConfirm() {
  return [](const std::string& question) -> std::optional<bool> {
    if (isatty(STDIN_FILENO) == 0) return std::nullopt;
    std::cerr << question << " [y/N] " << std::flush;
    std::string answer;
    if (!std::getline(std::cin, answer)) return false;
    answer = absl::AsciiStrToLower(absl::StripAsciiWhitespace(answer));
    return answer == "y" || answer == "yes";
  };
}

namespace {

// ---- Text ----

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

std::string Parent(uint64_t id) {
  return id == 0 ? "-" : absl::StrCat("#", id);
}

// Fixed widths, so that rows can be printed as they stream in.
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

absl::StatusOr<std::string> Json(const google::protobuf::Message& m) {
  std::string out;
  auto status = google::protobuf::util::MessageToJsonString(m, &out);
  if (!status.ok()) {
    return absl::InternalError(
        absl::StrCat("cannot encode the answer as JSON: ", status.ToString()));
  }
  return out + "\n";
}

int PrintJson(const google::protobuf::Message& m, Io& io) {
  absl::StatusOr<std::string> text = Json(m);
  if (!text.ok()) return ReportError(text.status(), io);
  *io.out << *text << std::flush;
  return kExitOk;
}

void SetDeadline(grpc::ClientContext* ctx) {
  ctx->set_deadline(absl::ToChronoTime(absl::Now() + kUnaryDeadline));
}

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

absl::StatusOr<uint32_t> DepthFlag(const ParsedArgs& args) {
  if (!args.Has("depth")) return 0u;
  return ParseBoundedUint("--depth", args.Get("depth"), 1, 100'000'000);
}

// ---- Streams: ancestors and descendants ----

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
        absl::StatusOr<std::string> text = Json(chunk);
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

// ---- Unary queries ----

double Gain(skerry::v1::Objective objective, const LineageNode& parent,
            const LineageNode& child) {
  return objective == skerry::v1::MAXIMIZE ? child.score() - parent.score()
                                           : parent.score() - child.score();
}

std::string ObjectiveName(skerry::v1::Objective o) {
  return o == skerry::v1::MAXIMIZE ? "maximize" : "minimize";
}

int DescentCommand(const Call& call, const GenomeRef& ref) {
  grpc::ClientContext ctx;
  SetDeadline(&ctx);
  skerry::v1::LineOfDescentRequest request;
  *request.mutable_genome() = ref;
  skerry::v1::LineOfDescentResponse line;
  absl::Status s = call.Check(call.stub.GetLineOfDescent(&ctx, request, &line),
                              "GetLineOfDescent");
  if (!s.ok()) return ReportError(s, call.io);
  if (call.args.Has("json")) return PrintJson(line, call.io);
  const auto& steps = line.steps();
  std::vector<std::vector<std::string>> rows;
  for (int i = 0; i < steps.size(); ++i) {
    const LineageNode& n = steps[i];
    std::string gain = "-";
    if (i + 1 < steps.size() && n.state() == skerry::v1::EVALUATED &&
        steps[i + 1].state() == skerry::v1::EVALUATED) {
      gain = FormatScore(Gain(line.objective(), steps[i + 1], n));
    }
    rows.push_back({absl::StrCat(n.key().generation()), Key(n),
                    absl::StrCat("#", n.id()), lineage::OriginLabel(n.origin()),
                    ScoreText(n), gain});
  }
  *call.io.out << "line of descent of " << Name(steps[0]) << ": "
               << steps.size() - 1 << " steps back to "
               << Name(steps[steps.size() - 1]) << " ("
               << lineage::OriginLabel(steps[steps.size() - 1].origin())
               << ")\nrule: " << line.rule()
               << "\nobjective: " << ObjectiveName(line.objective())
               << "; gain: the step's improvement over the parent below it\n"
               << FormatTable(
                      {"gen", "genome", "id", "origin", "score", "gain"}, rows,
                      {0, 4, 5});
  return kExitOk;
}

int CommonAncestorCommand(const Call& call, const GenomeRef& a,
                          const GenomeRef& b) {
  grpc::ClientContext ctx;
  SetDeadline(&ctx);
  skerry::v1::CommonAncestorRequest request;
  *request.mutable_a() = a;
  *request.mutable_b() = b;
  skerry::v1::CommonAncestorResponse out;
  absl::Status s = call.Check(call.stub.GetCommonAncestor(&ctx, request, &out),
                              "GetCommonAncestor");
  if (!s.ok()) return ReportError(s, call.io);
  if (call.args.Has("json")) return PrintJson(out, call.io);
  *call.io.out << "a: " << Name(out.a()) << "  score " << ScoreText(out.a())
               << "\nb: " << Name(out.b()) << "  score " << ScoreText(out.b())
               << "\n";
  if (!out.found()) {
    *call.io.out << "no common ancestor: the lineages never meet (read "
                 << FormatCount(out.visited()) << " genomes)\n";
    return kExitOk;
  }
  const LineageNode& first = out.ancestors(0);
  *call.io.out << "most recent common ancestor"
               << (out.ancestors_size() > 1 ? "s" : "") << " in generation "
               << first.key().generation() << " (" << out.depth_a() << " and "
               << out.depth_b() << " generations back; read "
               << FormatCount(out.visited()) << " genomes):\n"
               << NodeHeader();
  for (const LineageNode& n : out.ancestors()) *call.io.out << NodeRow(n);
  return kExitOk;
}

int CoalescenceCommand(const Call& call, uint32_t depth) {
  skerry::v1::CoalescenceRequest request;
  request.set_max_depth(depth);
  const std::string& target = call.args.positionals[0];
  const size_t slashes = std::count(target.begin(), target.end(), '/');
  if (slashes == 2) {
    absl::StatusOr<skerry::v1::PopulationRef> p = ParsePopulationRef(target);
    if (!p.ok()) {
      *call.io.err << "skerry: coalescence: " << p.status().message() << "\n";
      return kExitUsage;
    }
    *request.mutable_population() = *p;
  } else {
    absl::StatusOr<GenomeRef> g = ParseGenomeRef(target);
    if (!g.ok()) {
      *call.io.err << "skerry: coalescence: " << g.status().message() << "\n";
      return kExitUsage;
    }
    *request.mutable_genome() = *g;
  }
  grpc::ClientContext ctx;
  SetDeadline(&ctx);
  skerry::v1::CoalescenceResponse out;
  absl::Status s = call.Check(call.stub.GetCoalescence(&ctx, request, &out),
                              "GetCoalescence");
  if (!s.ok()) return ReportError(s, call.io);
  if (call.args.Has("json")) return PrintJson(out, call.io);
  std::vector<std::vector<std::string>> rows;
  for (const skerry::v1::CoalescenceLevel& l : out.levels()) {
    rows.push_back({absl::StrCat(l.generation()),
                    absl::StrCat(out.generation() - l.generation()),
                    FormatCount(l.ancestors()), absl::StrCat(l.islands())});
  }
  *call.io.out << "distinct ancestors of " << target << " (run " << out.run_id()
               << ", generation " << out.generation() << ") per generation:\n"
               << FormatTable({"gen", "back", "ancestors", "islands"}, rows,
                              {0, 1, 2, 3});
  return kExitOk;
}

void PrintAttribution(const skerry::v1::AttributionResponse& out, Io& io) {
  *io.out << "attribution of " << Name(out.genome()) << " ("
          << ObjectiveName(out.objective()) << "): line of descent of "
          << out.steps() << " steps from founder " << Name(out.founder())
          << " (" << lineage::OriginLabel(out.founder().origin()) << "), score "
          << ScoreText(out.founder()) << " -> " << ScoreText(out.genome())
          << ", total gain " << FormatScore(out.total_gain())
          << "\n\nby origin:\n";
  std::vector<std::vector<std::string>> rows;
  for (const skerry::v1::OriginShare& o : out.origins()) {
    rows.push_back({lineage::OriginLabel(o.origin()), absl::StrCat(o.steps()),
                    absl::StrCat(o.improvements()), FormatScore(o.gain()),
                    FormatScore(o.loss()), FormatScore(o.gain() - o.loss())});
  }
  *io.out << FormatTable(
      {"origin", "steps", "improvements", "gain", "loss", "net"}, rows,
      {1, 2, 3, 4, 5});
  rows.clear();
  for (const skerry::v1::DescentStep& st : out.improvements()) {
    rows.push_back({absl::StrCat(st.child().key().generation()),
                    Key(st.child()), lineage::OriginLabel(st.child().origin()),
                    ScoreText(st.parent()), ScoreText(st.child()),
                    FormatScore(st.gain())});
  }
  *io.out << "\nimprovements (oldest first):\n"
          << FormatTable({"gen", "genome", "origin", "from", "to", "gain"},
                         rows, {0, 3, 4, 5});
  rows.clear();
  for (const skerry::v1::IslandCrossing& c : out.crossings()) {
    rows.push_back({absl::StrCat(c.generation()),
                    absl::StrCat(c.from_island(), " -> ", c.to_island()),
                    lineage::OriginLabel(c.origin()),
                    absl::StrCat("#", c.child_id())});
  }
  *io.out << "\nisland crossings: " << out.crossings_size() << "\n";
  if (!rows.empty()) {
    *io.out << FormatTable({"gen", "islands", "origin", "genome"}, rows, {0});
  }
  *io.out << std::flush;
}

int AttributionCommand(const Call& call, const GenomeRef& ref) {
  grpc::ClientContext ctx;
  SetDeadline(&ctx);
  skerry::v1::AttributionRequest request;
  *request.mutable_genome() = ref;
  skerry::v1::AttributionResponse out;
  absl::Status s = call.Check(call.stub.GetAttribution(&ctx, request, &out),
                              "GetAttribution");
  if (!s.ok()) return ReportError(s, call.io);
  if (call.args.Has("json")) return PrintJson(out, call.io);
  PrintAttribution(out, call.io);
  return kExitOk;
}

int Usage(const ParsedArgs& args, const absl::Status& s, Io& io) {
  *io.err << "skerry: " << args.command << ": " << s.message() << "\n"
          << "run `skerry " << args.command << " --help` for its usage\n";
  return kExitUsage;
}

}  // namespace

int LineageCommand(const ParsedArgs& args, const LineageStubFactory& factory,
                   const Confirm& confirm, Io& io, uint64_t confirm_rows) {
  absl::StatusOr<uint32_t> depth = DepthFlag(args);
  if (!depth.ok()) return Usage(args, depth.status(), io);
  std::vector<GenomeRef> refs;
  if (args.command != "coalescence") {
    for (const std::string& text : args.positionals) {
      absl::StatusOr<GenomeRef> ref = ParseGenomeRef(text);
      if (!ref.ok()) return Usage(args, ref.status(), io);
      refs.push_back(*ref);
    }
  }
  std::unique_ptr<Stub> stub = factory(args.coordinator);
  Call call{args, *stub, confirm, io, confirm_rows};
  const std::string& c = args.command;
  if (c == "ancestors") return AncestorsCommand(call, refs[0], *depth);
  if (c == "descendants") return DescendantsCommand(call, refs[0], *depth);
  if (c == "descent") return DescentCommand(call, refs[0]);
  if (c == "common-ancestor") {
    return CommonAncestorCommand(call, refs[0], refs[1]);
  }
  if (c == "coalescence") return CoalescenceCommand(call, *depth);
  if (c == "attribution") return AttributionCommand(call, refs[0]);
  return Usage(args, absl::InvalidArgumentError("not a lineage command"), io);
}

}  // namespace skerry::cli
