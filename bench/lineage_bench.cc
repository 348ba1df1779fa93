// skerry-lineage-bench: builds a large store in the real schema (by default 10
// islands x 1,000 genomes x 1,000 generations = 10M genomes), bred by the
// engine's own Breed / ChooseEmigrants on sphere scores, then times the lineage
// queries against the bare recursive SQL and, with --coordinator, measures the
// resident memory of a real skerry-coordinator serving that database.
//
//   skerry-lineage-bench [--db FILE] [--generations N] [--islands N]
//       [--population N] [--repeat N] [--reuse] [--keep]
//       [--coordinator PATH-TO-skerry-coordinator]
//
// Figures go to stdout, each as the median and range of --repeat timed runs
// after a warm-up, with the load average at the start and the end; nothing
// here is asserted (see docs/performance.md).
#include "bench/lineage_bench.h"

#include <signal.h>
#include <sys/wait.h>
#include <unistd.h>

#include <algorithm>
#include <chrono>
#include <cstdio>
#include <cstring>
#include <filesystem>
#include <fstream>
#include <functional>
#include <string>
#include <thread>
#include <vector>

#include "absl/strings/numbers.h"
#include "absl/strings/str_cat.h"
#include "grpcpp/grpcpp.h"
#include "server/lineage/lineage_reader.h"
#include "server/store/sqlite.h"
#include "skerry/v1/lineage.grpc.pb.h"

namespace skerry::lineage_bench {
namespace {

using skerry::v1::GenomeRef;

bool ParseFlags(int argc, char** argv, Flags* f) {
  for (int i = 1; i < argc; ++i) {
    std::string a = argv[i];
    auto next = [&](uint32_t* v) {
      return i + 1 < argc && absl::SimpleAtoi(argv[++i], v) && *v > 0;
    };
    bool ok = true;
    if (a == "--db" && i + 1 < argc) {
      f->db = argv[++i];
    } else if (a == "--coordinator" && i + 1 < argc) {
      f->coordinator = argv[++i];
    } else if (a == "--generations") {
      ok = next(&f->generations);
    } else if (a == "--islands") {
      ok = next(&f->islands);
    } else if (a == "--population") {
      ok = next(&f->population);
    } else if (a == "--repeat") {
      ok = next(&f->repeat);
    } else if (a == "--reuse") {
      f->reuse = true;
    } else if (a == "--keep") {
      f->keep = true;
    } else {
      ok = false;
    }
    if (!ok) {
      std::fprintf(stderr,
                   "skerry-lineage-bench: bad argument '%s' (see the "
                   "header of bench/lineage_bench.cc)\n",
                   a.c_str());
      return false;
    }
  }
  return true;
}

// Wall-clock times of `repeat` runs after one warm-up run, in ms.
struct Timing {
  double min = 0, median = 0, max = 0;
};

Timing TimeMs(uint32_t repeat, const std::function<uint64_t()>& fn,
              uint64_t* answer) {
  *answer = fn();
  std::vector<double> ms;
  for (uint32_t r = 0; r < repeat; ++r) {
    const auto t = std::chrono::steady_clock::now();
    fn();
    ms.push_back(Seconds(t) * 1e3);
  }
  std::sort(ms.begin(), ms.end());
  return Timing{ms.front(), ms[ms.size() / 2], ms.back()};
}

// The 1-minute load average, to say how busy the machine was.
std::string LoadAverage() {
  std::ifstream in("/proc/loadavg");
  std::string one;
  in >> one;
  return one.empty() ? "unknown" : one;
}

GenomeRef Key(uint32_t island, uint32_t gen, uint32_t slot) {
  GenomeRef r;
  r.mutable_key()->set_run_id(1);
  r.mutable_key()->set_island(island);
  r.mutable_key()->set_generation(gen);
  r.mutable_key()->set_slot(slot);
  return r;
}

void Report(const std::string& what, const Timing& t, uint64_t answer,
            const char* unit) {
  std::printf("%-46s %10.2f ms  [%.2f-%.2f]  (%llu %s)\n", what.c_str(),
              t.median, t.min, t.max, static_cast<unsigned long long>(answer),
              unit);
}

void Ratio(const Timing& t, const Timing& wide, const Timing& bare) {
  std::printf("%-46s %10.2f x  (%.2f x the ids-only query)\n",
              "  ratio to the all-columns bare query", t.median / wide.median,
              t.median / bare.median);
}

// Streams an answer through the reader, counting nodes.
template <typename Request>
uint64_t StreamCount(
    const Request& req,
    absl::Status (skerry::lineage::LineageReader::*query)(
        const Request&,
        const std::function<
            bool(const skerry::lineage::LineageReader::StreamHead&)>&,
        const skerry::lineage::LineageReader::BatchSink&),
    skerry::lineage::LineageReader& reader) {
  uint64_t n = 0;
  absl::Status s = (reader.*query)(
      req, [](const auto&) { return true; },
      [&](skerry::v1::LineageChunk& b) {
        n += b.nodes_size();
        return true;
      });
  if (!s.ok()) Die(s, "stream");
  return n;
}

uint64_t GrpcAncestorsCount(skerry::v1::LineageService::Stub& stub,
                            const skerry::v1::AncestorsRequest& req) {
  grpc::ClientContext ctx;
  skerry::v1::LineageChunk chunk;
  uint64_t n = 0;
  auto r = stub.StreamAncestors(&ctx, req);
  while (r->Read(&chunk)) n += chunk.nodes_size();
  if (!r->Finish().ok()) Die(absl::InternalError("stream"), "grpc");
  return n;
}

void Queries(const Flags& f, skerry::v1::LineageService::Stub* stub) {
  using skerry::lineage::LineageReader;
  auto reader = LineageReader::Open(f.db);
  if (!reader.ok()) Die(reader.status(), "reader");
  auto bare = skerry::store::Connection::Open(f.db, SQLITE_OPEN_READONLY);
  if (!bare.ok()) Die(bare.status(), "bare connection");
  (*bare)->Exec("PRAGMA cache_size=-8192").IgnoreError();
  const uint32_t last = f.generations - 1;
  const uint32_t depth = std::min<uint32_t>(100, last);
  auto late = (*reader)->Resolve(Key(0, last, 17));
  if (!late.ok()) Die(late.status(), "late genome");
  const int64_t late_id = static_cast<int64_t>(late->id());
  uint64_t n = 0;

  const Timing bare_ms = TimeMs(
      f.repeat,
      [&] { return BareAncestors(bare->get(), late_id, last - depth); }, &n);
  Report(absl::StrCat("bare recursive SQL, ids only, depth ", depth), bare_ms,
         n, "ancestors");
  const Timing wide_ms = TimeMs(
      f.repeat,
      [&] { return BareWideAncestors(bare->get(), late_id, last - depth); },
      &n);
  Report(absl::StrCat("bare recursive SQL, all columns, depth ", depth),
         wide_ms, n, "ancestors");
  skerry::v1::AncestorsRequest req;
  *req.mutable_genome() = Key(0, last, 17);
  req.set_max_depth(depth);
  const Timing lib_ms = TimeMs(
      f.repeat,
      [&] { return StreamCount(req, &LineageReader::Ancestors, **reader); },
      &n);
  Report(absl::StrCat("ancestors depth ", depth, " (LineageReader)"), lib_ms, n,
         "ancestors");
  Ratio(lib_ms, wide_ms, bare_ms);
  if (stub != nullptr) {
    const Timing rpc_ms = TimeMs(
        f.repeat, [&] { return GrpcAncestorsCount(*stub, req); }, &n);
    Report(absl::StrCat("ancestors depth ", depth, " (gRPC stream)"), rpc_ms, n,
           "ancestors");
    Ratio(rpc_ms, wide_ms, bare_ms);
  }

  GenomeRef champion;
  champion.set_champion_of_run(1);
  const Timing line_ms = TimeMs(
      f.repeat,
      [&] {
        auto line = (*reader)->LineOfDescent(champion);
        if (!line.ok()) Die(line.status(), "descent");
        return static_cast<uint64_t>(line->steps_size());
      },
      &n);
  Report("line of descent of the champion", line_ms, n, "steps");
  const Timing attr_ms = TimeMs(
      f.repeat,
      [&] {
        auto a = (*reader)->Attribution(champion);
        if (!a.ok()) Die(a.status(), "attribution");
        return static_cast<uint64_t>(a->improvements_size());
      },
      &n);
  Report("attribution of the champion", attr_ms, n, "improvements");

  skerry::v1::DescendantsRequest dreq;
  *dreq.mutable_genome() = Key(0, last / 2, 0);
  dreq.set_max_depth(10);
  const Timing desc_ms = TimeMs(
      f.repeat,
      [&] { return StreamCount(dreq, &LineageReader::Descendants, **reader); },
      &n);
  Report("descendants depth 10 (slot 0 of a mid generation)", desc_ms, n,
         "descendants");

  skerry::v1::CoalescenceRequest creq;
  *creq.mutable_genome() = Key(0, last, 17);
  creq.set_max_depth(depth);
  const Timing coal_ms = TimeMs(
      f.repeat,
      [&] {
        auto c = (*reader)->Coalescence(creq);
        if (!c.ok()) Die(c.status(), "coalescence");
        return static_cast<uint64_t>(c->levels_size());
      },
      &n);
  Report(absl::StrCat("coalescence depth ", depth, " (the same genome)"),
         coal_ms, n, "levels");

  struct Pair {
    const char* what;
    GenomeRef a, b;
  };
  const uint32_t other = f.islands / 2;
  const uint32_t earlier = last >= 100 ? last - 100 : 0;
  for (const Pair& p : {Pair{"common ancestor, same island", Key(0, last, 10),
                             Key(0, last, 20)},
                        Pair{"common ancestor, islands 0 and N/2",
                             Key(0, last, 10), Key(other, last, 20)},
                        Pair{"common ancestor, 0 and N/2, 100 gen apart",
                             Key(0, last, 10), Key(other, earlier, 20)}}) {
    uint32_t back = 0;
    const Timing ms = TimeMs(
        f.repeat,
        [&] {
          auto c = (*reader)->CommonAncestor(p.a, p.b);
          if (!c.ok()) Die(c.status(), "common ancestor");
          back = c->depth_a();
          return c->visited();
        },
        &n);
    Report(absl::StrCat(p.what, " (", back, " gen back)"), ms, n,
           "genomes read");
  }
}

long RssKib(pid_t pid, const char* field) {
  std::ifstream in(absl::StrCat("/proc/", pid, "/status"));
  std::string line;
  while (std::getline(in, line)) {
    if (line.rfind(field, 0) == 0)
      return std::atol(line.c_str() + strlen(field) + 1);
  }
  return -1;
}

// Starts the real coordinator on the database, runs the queries through it,
// and reads its resident memory.
void CoordinatorMemory(const Flags& f) {
  int out[2];
  if (pipe(out) != 0) return;
  const pid_t pid = fork();
  if (pid == 0) {
    dup2(out[1], STDOUT_FILENO);
    close(out[0]);
    execl(f.coordinator.c_str(), f.coordinator.c_str(), "--db", f.db.c_str(),
          "--listen", "127.0.0.1:0", static_cast<char*>(nullptr));
    _exit(127);
  }
  close(out[1]);
  FILE* in = fdopen(out[0], "r");
  char line[512] = {0};
  int port = 0;
  if (in != nullptr && std::fgets(line, sizeof(line), in) != nullptr) {
    const char* p = std::strstr(line, "port ");
    if (p != nullptr) port = std::atoi(p + 5);
  }
  if (port == 0) {
    std::fprintf(stderr, "coordinator did not start: %s\n", line);
    kill(pid, SIGTERM);
    waitpid(pid, nullptr, 0);
    return;
  }
  std::printf("coordinator VmRSS after start: %ld KiB\n",
              RssKib(pid, "VmRSS:"));
  auto stub = skerry::v1::LineageService::NewStub(grpc::CreateChannel(
      absl::StrCat("127.0.0.1:", port), grpc::InsecureChannelCredentials()));
  Queries(f, stub.get());
  std::printf(
      "coordinator VmRSS after the queries: %ld KiB (peak VmHWM %ld KiB)\n",
      RssKib(pid, "VmRSS:"), RssKib(pid, "VmHWM:"));
  kill(pid, SIGTERM);
  waitpid(pid, nullptr, 0);
  if (in != nullptr) fclose(in);
}

}  // namespace
}  // namespace skerry::lineage_bench

int main(int argc, char** argv) {
  using namespace skerry::lineage_bench;  // NOLINT: main alone
  Flags f;
  if (!ParseFlags(argc, argv, &f)) return 2;
  if (!f.reuse || !std::filesystem::exists(f.db)) BuildStore(f);
  std::printf(
      "queries (median [min-max] of %u after a warm-up; load average %s):\n",
      f.repeat, LoadAverage().c_str());
  if (f.coordinator.empty()) {
    Queries(f, nullptr);
  } else {
    CoordinatorMemory(f);
  }
  std::printf("load average at the end: %s (%u cores)\n", LoadAverage().c_str(),
              std::thread::hardware_concurrency());
  if (!f.keep) {
    std::filesystem::remove(f.db);
    std::filesystem::remove(f.db + "-wal");
    std::filesystem::remove(f.db + "-shm");
  }
  return 0;
}
