#include "cli/network_command.h"

#include <cstdio>
#include <fstream>

#include "absl/strings/str_cat.h"
#include "absl/strings/str_format.h"
#include "common/network_export.h"
#include "server/engine/breeder.h"

namespace skerry::cli {

uint64_t GenomeEvalSeed(const skerry::v1::RunSpec& spec,
                        const skerry::v1::Genome& genome) {
  return engine::EvalSeed(spec, genome.key().island(),
                          genome.key().generation(), genome.key().slot());
}

int NetworkCommand(RunClient& client, uint64_t run_id,
                   const std::string& out_path, Io& io) {
  absl::StatusOr<skerry::v1::GetRunResponse> run = client.Get(run_id);
  if (!run.ok()) return ReportError(run.status(), io);
  if (run->spec().evaluator().network().layers().empty()) {
    *io.err << "skerry: network: run " << run_id
            << "'s genomes are not networks (its evaluator has no "
               "evaluator.network; only the pole evaluators use one)\n";
    return kExitFailure;
  }
  absl::StatusOr<skerry::v1::Genome> genome = client.Champion(run_id);
  if (!genome.ok()) return ReportError(genome.status(), io);
  const skerry::v1::GenomeKey& k = genome->key();
  ExportNotes notes = {
      {"run", absl::StrCat(run_id)},
      {"run_name", run->spec().name()},
      {"genome", absl::StrCat(genome->id(), " (", k.run_id(), "/", k.island(),
                              "/", k.generation(), "/", k.slot(), ")")},
      {"score", absl::StrFormat("%.17g", genome->score())},
      {"evaluation_seed", absl::StrCat(GenomeEvalSeed(run->spec(), *genome))}};
  absl::StatusOr<std::string> json = ExportNetworkJson(
      run->spec().evaluator().network(), genome->genes(), notes);
  if (!json.ok()) return ReportError(json.status(), io);
  const std::string partial = out_path + ".partial";
  {
    std::ofstream file(partial, std::ios::binary | std::ios::trunc);
    file << *json;
    file.close();
    if (!file || std::rename(partial.c_str(), out_path.c_str()) != 0) {
      std::remove(partial.c_str());
      *io.err << "skerry: network: cannot write " << out_path << "\n";
      return kExitFailure;
    }
  }
  *io.out << "network of run " << run_id << "'s champion (genome "
          << genome->id() << ") written to " << out_path << "\n";
  return kExitOk;
}

}  // namespace skerry::cli
