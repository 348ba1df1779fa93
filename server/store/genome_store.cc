// GenomeStore (genome_store.h): a run's genome rows, results, rebuilt
// genes and digest.
#include "server/store/genome_store.h"

#include <algorithm>
#include <cstring>
#include <map>
#include <memory>
#include <tuple>
#include <utility>

#include "absl/container/flat_hash_map.h"
#include "absl/strings/match.h"
#include "absl/strings/str_cat.h"
#include "common/child_recipe.h"
#include "common/genes.h"
#include "common/sample_recipe.h"
#include "common/sha256.h"
#include "common/status_macros.h"
#include "server/store/row_sums.h"
#include "server/store/validation_store.h"

namespace skerry::store {

const std::string& GenomeStore::GenomeColumns() {
  static const std::string* columns = new std::string(absl::StrCat(
      "id, run_id, island, generation, slot, origin, parent_a, parent_b, "
      "genes, score, eval_state, attempts, error, eval_seconds, ",
      SumMatches(kGenomeSumColumns)));
  return *columns;
}

namespace {

using skerry::v1::EvalState;

absl::StatusOr<GenomeRecord> ReadGenome(const Statement& s) {
  GenomeRecord g;
  g.id = s.ColumnInt(0);
  g.run_id = s.ColumnInt(1);
  g.island = static_cast<uint32_t>(s.ColumnInt(2));
  g.generation = static_cast<uint32_t>(s.ColumnInt(3));
  g.slot = static_cast<uint32_t>(s.ColumnInt(4));
  if (s.ColumnInt(14) != 1) {
    return DamagedGenome(g.run_id, g.island, g.generation, g.slot, g.id);
  }
  g.origin = static_cast<skerry::v1::Origin>(s.ColumnInt(5));
  g.parent_a = s.ColumnIsNull(6) ? 0 : s.ColumnInt(6);
  g.parent_b = s.ColumnIsNull(7) ? 0 : s.ColumnInt(7);
  const std::string blob = s.ColumnBlob(8);
  if (IsChildRecipe(blob)) {
    // A GA genome kept as its recipe (with its genes when a keyframe):
    // RebuildChildren makes the genes of the others.
    absl::StatusOr<UnpackedChild> child = UnpackChildRecipe(blob);
    if (!child.ok()) {
      return absl::DataLossError(
          absl::StrCat("genome ", g.id, ": ", child.status().message()));
    }
    g.child_recipe = child->recipe;
    if (child->genes.has_value()) {
      g.genes = *std::move(child->genes);
      g.keyframe = true;
    }
  } else if (IsRecipe(blob)) {
    // A natural ES sample: RebuildSamples makes its genes.
    absl::StatusOr<SampleRecipe> recipe = UnpackRecipe(blob);
    if (!recipe.ok()) {
      return absl::DataLossError(
          absl::StrCat("genome ", g.id, ": ", recipe.status().message()));
    }
    g.recipe = *recipe;
  } else {
    absl::StatusOr<std::vector<double>> genes = UnpackGenes(blob);
    if (!genes.ok()) {
      return absl::DataLossError(
          absl::StrCat("genome ", g.id, ": ", genes.status().message()));
    }
    g.genes = std::move(*genes);
  }
  g.score = s.ColumnIsNull(9) ? 0.0 : s.ColumnDouble(9);
  g.state = static_cast<EvalState>(s.ColumnInt(10));
  g.attempts = static_cast<uint32_t>(s.ColumnInt(11));
  g.error = s.ColumnText(12);
  g.eval_seconds = s.ColumnDouble(13);
  return g;
}

// The float64 bytes of the genes of sample `id`, stored as `recipe`, from
// its distribution genome `parent`: in `centres` when the digest read it
// just before, else read here (a fork's copied sample names its parent
// run's).
absl::StatusOr<std::string> SampleBytes(
    Connection* conn, int64_t id, const std::string& recipe, int64_t parent,
    absl::flat_hash_map<int64_t, std::vector<double>>* centres) {
  auto it = centres->find(parent);
  if (it == centres->end()) {
    GenomeRecord sample;
    sample.id = id;
    sample.parent_a = parent;
    SKERRY_ASSIGN_OR_RETURN(sample.recipe, UnpackRecipe(recipe));
    std::vector<GenomeRecord> one = {std::move(sample)};
    SKERRY_RETURN_IF_ERROR(GenomeStore::RebuildSamples(conn, &one));
    return Float64Bytes(PackGenes(one.front().genes));
  }
  SKERRY_ASSIGN_OR_RETURN(SampleRecipe r, UnpackRecipe(recipe));
  SKERRY_ASSIGN_OR_RETURN(std::vector<double> genes,
                          BuildSample(r, it->second));
  return Float64Bytes(PackGenes(genes));
}

// The genes of the GA genomes kept as recipes that the digest reads, in
// (island, generation, slot) order: each is built from its parents, held
// here for the island's newest two generations (an elite's or a child's
// parents are in the generation before it); a migrant's parent, of another
// island, is replayed from its own ancestry (GenomeStore::RebuildChildren).
class DigestChildren {
 public:
  absl::StatusOr<std::string> Bytes(Connection* conn, int64_t id,
                                    const std::string& blob, int64_t parent_a,
                                    int64_t parent_b, uint32_t island,
                                    uint32_t generation) {
    if (island != island_ || generation != generation_)
      Advance(island, generation);
    GenomeRecord g;
    g.id = id;
    g.parent_a = parent_a;
    g.parent_b = parent_b;
    SKERRY_ASSIGN_OR_RETURN(UnpackedChild child, UnpackChildRecipe(blob));
    g.child_recipe = child.recipe;
    if (child.genes.has_value()) g.genes = *std::move(child.genes);
    std::vector<GenomeRecord> one = {std::move(g)};
    SKERRY_RETURN_IF_ERROR(GenomeStore::RebuildChildren(conn, &one, &known_));
    auto genes =
        std::make_shared<const std::vector<double>>(std::move(one[0].genes));
    known_[id] = genes;
    newest_.push_back(id);
    return Float64Bytes(PackGenes(*genes));
  }

 private:
  void Advance(uint32_t island, uint32_t generation) {
    for (int64_t id : older_) known_.erase(id);
    older_.clear();
    if (island == island_ && generation == generation_ + 1) {
      older_.swap(newest_);
    } else {
      for (int64_t id : newest_) known_.erase(id);
      newest_.clear();
    }
    island_ = island;
    generation_ = generation;
  }

  uint32_t island_ = 0;
  uint32_t generation_ = 0;
  GeneCache known_;
  std::vector<int64_t> newest_;  // ids of generation_'s genomes held
  std::vector<int64_t> older_;   // ids of generation_ - 1's
};

}  // namespace

std::string IsChildRecipeSql(absl::string_view column) {
  return absl::StrCat(
      "(length(", column, ") >= ", kChildRecipeBytes, " AND substr(", column,
      ", 1, 1) = x'",
      absl::Hex(static_cast<int>(kChildRecipeTag), absl::kZeroPad2), "')");
}

absl::Status GenomeStore::Insert(Database::Writer& w,
                                 std::vector<GenomeRecord>* genomes) {
  // The id is chosen here, as SQLite would (the largest rowid plus one; the
  // table has no AUTOINCREMENT), because the row's sum covers it and is
  // computed in the INSERT itself (schema version 12, SchemaV12).
  // Above every id ever given, a deleted genome's included (id_floors).
  SKERRY_ASSIGN_OR_RETURN(int64_t next_id,
                          Database::LargestId(w, Database::IdTable::kGenomes));
  SKERRY_ASSIGN_OR_RETURN(
      auto ins,
      w->PrepareCached(
          "INSERT INTO genomes (id, run_id, island, generation, slot, origin, "
          "parent_a, parent_b, genes, score, eval_state, attempts, error, "
          "eval_seconds, sum) VALUES (?1,?2,?3,?4,?5,?6,?7,?8,?9,?10,?11,?12,"
          "?13,?14,skerry_row_sum(?1,?2,?3,?4,?5,?6,?7,?8,?9,?10,?11,?12,?13,"
          "?14))"));
  // Ids of the batch's rows by key, for links into their own generation
  // (GenomeRecord::parent_a_slot); kept only when a row has such a link.
  using Key = std::tuple<int64_t, uint32_t, uint32_t, uint32_t>;
  const bool linked =
      std::any_of(genomes->begin(), genomes->end(),
                  [](const GenomeRecord& g) { return g.parent_a_slot >= 0; });
  absl::flat_hash_map<Key, int64_t> inserted;
  for (GenomeRecord& g : *genomes) {
    if (g.parent_a_slot >= 0) {
      auto parent = inserted.find(Key{g.run_id, g.island, g.generation,
                                      static_cast<uint32_t>(g.parent_a_slot)});
      if (parent == inserted.end()) {
        return absl::InternalError(absl::StrCat(
            "run ", g.run_id, " island ", g.island, " generation ",
            g.generation, " slot ", g.slot, ": its parent at slot ",
            g.parent_a_slot, " is not inserted before it"));
      }
      g.parent_a = parent->second;
    }
    ins.BindInt(1, ++next_id);
    ins.BindInt(2, g.run_id);
    ins.BindInt(3, g.island);
    ins.BindInt(4, g.generation);
    ins.BindInt(5, g.slot);
    ins.BindInt(6, g.origin);
    ins.BindIdOrNull(7, g.parent_a);
    ins.BindIdOrNull(8, g.parent_b);
    if (g.recipe.has_value()) {
      ins.BindBlob(9, PackRecipe(*g.recipe));
    } else if (g.child_recipe.has_value()) {
      ins.BindBlob(9, g.keyframe ? PackChildRecipe(*g.child_recipe, g.genes)
                                 : PackChildRecipe(*g.child_recipe));
    } else {
      ins.BindBlob(9, PackGenes(g.genes));
    }
    if (g.state == skerry::v1::PENDING) {
      ins.BindNull(10);
    } else {
      ins.BindDouble(10, g.score);
    }
    ins.BindInt(11, g.state);
    ins.BindInt(12, g.attempts);
    ins.BindText(13, g.error);
    ins.BindDouble(14, g.eval_seconds);
    SKERRY_RETURN_IF_ERROR(ins.Run());
    g.id = next_id;
    if (linked) inserted[Key{g.run_id, g.island, g.generation, g.slot}] = g.id;
  }
  return absl::OkStatus();
}

namespace {

// A GA genome read or bred with its genes and stored as its recipe alone:
// what KeepWhole writes.
bool RecipeAloneWithGenes(const GenomeRecord& g) {
  return g.child_recipe.has_value() && !g.keyframe && !g.genes.empty();
}

}  // namespace

absl::Status GenomeStore::KeepWhole(Database::Writer& w,
                                    const GenomeRecord& g) {
  if (!RecipeAloneWithGenes(g)) return absl::OkStatus();
  // Only a row holding the recipe alone: a keyframe's genes are never
  // rewritten.
  SKERRY_ASSIGN_OR_RETURN(
      auto keep, w->PrepareCached(absl::StrCat(
                     "UPDATE genomes SET genes = ?2 WHERE id = ?1 AND ",
                     IsChildRecipeSql("genes"),
                     " AND length(genes) = ", kChildRecipeBytes)));
  keep.BindInt(1, g.id);
  keep.BindBlob(2, PackChildRecipe(*g.child_recipe, g.genes));
  return keep.Run();
}

absl::Status GenomeStore::KeepWhole(const GenomeRecord& g) {
  // Checked before the writer is taken: most genomes asked for (champions)
  // are stored whole, and answer without waiting for a commit.
  if (db_->read_only() || !RecipeAloneWithGenes(g)) return absl::OkStatus();
  Database::Writer w = db_->Write();
  SKERRY_ASSIGN_OR_RETURN(auto txn, Transaction::Begin(w.conn()));
  SKERRY_RETURN_IF_ERROR(KeepWhole(w, g));
  return txn.Commit();
}

absl::Status GenomeStore::CommitResults(
    absl::Span<const ResultUpdate> results,
    absl::Span<const ValidationUpdate> validations) {
  Database::Writer w = db_->Write();
  SKERRY_ASSIGN_OR_RETURN(auto txn, Transaction::Begin(w.conn()));
  SKERRY_ASSIGN_OR_RETURN(
      auto upd,
      w->PrepareCached(
          "UPDATE genomes SET eval_state = ?1, score = ?2, attempts = ?3, "
          "error = ?4, eval_seconds = ?5, sum = skerry_row_sum(id, run_id, "
          "island, generation, slot, origin, parent_a, parent_b, genes, ?2, "
          "?1, ?3, ?4, ?5) WHERE id = ?6 AND eval_state = 1"));
  std::map<int64_t, int64_t> finished_per_run;
  for (const ResultUpdate& r : results) {
    upd.BindInt(1, r.state);
    if (r.state == skerry::v1::EVALUATED) {
      upd.BindDouble(2, r.score);
    } else {
      upd.BindNull(2);
    }
    upd.BindInt(3, r.attempts);
    upd.BindText(4, r.error);
    upd.BindDouble(5, r.eval_seconds);
    upd.BindInt(6, r.genome_id);
    SKERRY_RETURN_IF_ERROR(upd.Run());
    if (w->Changes() != 1) {
      return absl::FailedPreconditionError(absl::StrCat(
          "genome ", r.genome_id, " is not pending; batch not applied"));
    }
    if (r.state != skerry::v1::PENDING) ++finished_per_run[r.run_id];
    if (r.state == skerry::v1::EVALUATED && !r.metrics.empty()) {
      SKERRY_RETURN_IF_ERROR(InsertMetrics(w, r));
    }
  }
  SKERRY_ASSIGN_OR_RETURN(
      auto cnt, w->Prepare("UPDATE runs SET evaluations = evaluations + ? "
                           "WHERE id = ?"));
  for (const auto& [run_id, n] : finished_per_run) {
    cnt.BindInt(1, n);
    cnt.BindInt(2, run_id);
    SKERRY_RETURN_IF_ERROR(cnt.Run());
  }
  SKERRY_RETURN_IF_ERROR(ValidationStore::Apply(w, validations));
  return txn.Commit();
}

absl::StatusOr<std::vector<GenomeRecord>> GenomeStore::QueryGenomes(
    Connection* conn, Statement* s, Genes genes) {
  std::vector<GenomeRecord> out;
  while (true) {
    SKERRY_ASSIGN_OR_RETURN(auto row, s->Step());
    if (!row) break;
    SKERRY_ASSIGN_OR_RETURN(auto g, ReadGenome(*s));
    out.push_back(std::move(g));
  }
  if (genes == Genes::kAll) {
    SKERRY_RETURN_IF_ERROR(RebuildSamples(conn, &out));
  }
  if (genes != Genes::kStored) {
    SKERRY_RETURN_IF_ERROR(RebuildChildren(conn, &out));
  }
  return out;
}

absl::Status GenomeStore::RebuildChildren(Connection* conn,
                                          std::vector<GenomeRecord>* genomes,
                                          const GeneCache* known) {
  bool any = false;
  for (const GenomeRecord& g : *genomes) {
    any = any || (g.child_recipe.has_value() && g.genes.empty());
  }
  if (!any) return absl::OkStatus();
  SKERRY_ASSIGN_OR_RETURN(Statement by_id, conn->PrepareCached(absl::StrCat(
                                               "SELECT ", GenomeColumns(),
                                               " FROM genomes WHERE id = ?")));
  const GenomeReader read =
      [&by_id](int64_t id) -> absl::StatusOr<std::optional<GenomeRecord>> {
    by_id.Reset();
    by_id.BindInt(1, id);
    SKERRY_ASSIGN_OR_RETURN(bool row, by_id.Step());
    if (!row) return std::optional<GenomeRecord>();
    SKERRY_ASSIGN_OR_RETURN(GenomeRecord g, ReadGenome(by_id));
    return std::optional<GenomeRecord>(std::move(g));
  };
  absl::Status rebuilt = store::RebuildChildren(read, genomes, known);
  // The run the genomes are of, when the caller read them so: where the
  // damage is (the message names the genome and its parent).
  const int64_t run = genomes->front().run_id;
  if (rebuilt.ok() || run == 0) return rebuilt;
  for (const GenomeRecord& g : *genomes) {
    if (g.run_id != run) return rebuilt;
  }
  return absl::Status(rebuilt.code(),
                      absl::StrCat("run ", run, ": ", rebuilt.message()));
}

absl::StatusOr<std::vector<std::string>> GenomeStore::CheckKeyframes(
    Connection* conn, int64_t run_id, int sample) {
  SKERRY_ASSIGN_OR_RETURN(
      Statement s,
      conn->Prepare(absl::StrCat(
          "SELECT ", GenomeColumns(), " FROM genomes WHERE run_id = ? AND ",
          IsChildRecipeSql("genes"), " AND length(genes) > ", kChildRecipeBytes,
          " ORDER BY generation, island, slot LIMIT ?")));
  s.BindInt(1, run_id);
  s.BindInt(2, sample);
  std::vector<std::string> problems;
  std::vector<GenomeRecord> kept;
  while (true) {
    SKERRY_ASSIGN_OR_RETURN(bool row, s.Step());
    if (!row) break;
    absl::StatusOr<GenomeRecord> g = ReadGenome(s);
    if (!g.ok()) {
      problems.push_back(std::string(g.status().message()));
      continue;
    }
    kept.push_back(*std::move(g));
  }
  // The stored genes set aside, the records rebuilt as if they had none.
  std::vector<std::vector<double>> stored;
  for (GenomeRecord& g : kept) stored.push_back(std::exchange(g.genes, {}));
  if (absl::Status r = RebuildChildren(conn, &kept); !r.ok()) {
    problems.push_back(std::string(r.message()));
    return problems;
  }
  for (size_t i = 0; i < kept.size(); ++i) {
    if (kept[i].genes != stored[i]) {
      problems.push_back(absl::StrCat(
          "island ", kept[i].island, " generation ", kept[i].generation,
          " slot ", kept[i].slot, " genome ", kept[i].id,
          ": replaying its recipe does not give its stored genes"));
    }
  }
  return problems;
}

absl::Status GenomeStore::RebuildSamples(Connection* conn,
                                         std::vector<GenomeRecord>* genomes) {
  // The distribution genomes at hand (a generation read whole has its own
  // at slot 0), then those read here, by id.
  absl::flat_hash_map<int64_t, const std::vector<double>*> centres;
  std::vector<std::unique_ptr<GenomeRecord>> read;
  for (const GenomeRecord& g : *genomes) {
    if (g.origin == skerry::v1::DISTRIBUTION) centres[g.id] = &g.genes;
  }
  std::optional<Statement> parent;
  for (GenomeRecord& g : *genomes) {
    if (!g.recipe.has_value() || !g.genes.empty()) continue;
    auto it = centres.find(g.parent_a);
    if (it == centres.end()) {
      if (!parent.has_value()) {
        SKERRY_ASSIGN_OR_RETURN(parent, conn->PrepareCached(absl::StrCat(
                                            "SELECT ", GenomeColumns(),
                                            " FROM genomes WHERE id = ?")));
      }
      parent->Reset();
      parent->BindInt(1, g.parent_a);
      SKERRY_ASSIGN_OR_RETURN(bool row, parent->Step());
      if (!row) {
        return absl::DataLossError(absl::StrCat(
            "genome ", g.id, ": its distribution genome #", g.parent_a,
            " is not in the database, so its genes cannot be rebuilt"));
      }
      SKERRY_ASSIGN_OR_RETURN(GenomeRecord p, ReadGenome(*parent));
      read.push_back(std::make_unique<GenomeRecord>(std::move(p)));
      it = centres.emplace(read.back()->id, &read.back()->genes).first;
      if (read.back()->origin != skerry::v1::DISTRIBUTION) {
        return absl::DataLossError(absl::StrCat(
            "genome ", g.id, ": its parent #", g.parent_a,
            " is not a distribution genome, so its genes cannot be rebuilt"));
      }
    }
    absl::StatusOr<std::vector<double>> genes =
        BuildSample(*g.recipe, *it->second);
    if (!genes.ok()) {
      return absl::DataLossError(
          absl::StrCat("genome ", g.id, ": ", genes.status().message()));
    }
    g.genes = *std::move(genes);
  }
  return absl::OkStatus();
}

absl::StatusOr<std::vector<GenomeRecord>> GenomeStore::GetGeneration(
    int64_t run_id, uint32_t island, uint32_t generation, Genes genes) {
  SKERRY_ASSIGN_OR_RETURN(ReadPool::Lease reader, db_->Reader());
  SKERRY_ASSIGN_OR_RETURN(
      auto s,
      reader->PrepareCached(absl::StrCat(
          "SELECT ", GenomeColumns(),
          " FROM genomes WHERE run_id = ? AND island = ? AND generation = ? "
          "ORDER BY slot")));
  s.BindInt(1, run_id);
  s.BindInt(2, island);
  s.BindInt(3, generation);
  return QueryGenomes(reader.get(), &s, genes);
}

absl::StatusOr<GenomeRecord> GenomeStore::GetGenome(int64_t genome_id,
                                                    Genes genes) {
  SKERRY_ASSIGN_OR_RETURN(ReadPool::Lease reader, db_->Reader());
  SKERRY_ASSIGN_OR_RETURN(
      auto s, reader->PrepareCached(absl::StrCat(
                  "SELECT ", GenomeColumns(), " FROM genomes WHERE id = ?")));
  s.BindInt(1, genome_id);
  SKERRY_ASSIGN_OR_RETURN(std::vector<GenomeRecord> rows,
                          QueryGenomes(reader.get(), &s, genes));
  if (rows.empty()) {
    return absl::NotFoundError(absl::StrCat(
        "genome ", static_cast<uint64_t>(genome_id), " not found"));
  }
  return std::move(rows.front());
}

absl::StatusOr<std::vector<double>> GenomeStore::GenesOf(
    Connection* conn, int64_t id, const std::string& blob, int64_t parent_a,
    int64_t parent_b) {
  auto lost = [id](const absl::Status& s) {
    return absl::DataLossError(
        absl::StrCat("genome ", id, ": stored genes: ", s.message()));
  };
  if (!IsRecipe(blob) && !IsChildRecipe(blob)) {
    absl::StatusOr<std::vector<double>> genes = UnpackGenes(blob);
    if (!genes.ok()) return lost(genes.status());
    return genes;
  }
  std::vector<GenomeRecord> one(1);
  GenomeRecord& g = one.front();
  g.id = id;
  g.parent_a = parent_a;
  g.parent_b = parent_b;
  if (IsRecipe(blob)) {
    absl::StatusOr<SampleRecipe> recipe = UnpackRecipe(blob);
    if (!recipe.ok()) return lost(recipe.status());
    g.recipe = *recipe;
    SKERRY_RETURN_IF_ERROR(GenomeStore::RebuildSamples(conn, &one));
  } else {
    absl::StatusOr<UnpackedChild> child = UnpackChildRecipe(blob);
    if (!child.ok()) return lost(child.status());
    g.child_recipe = child->recipe;
    if (child->genes.has_value()) g.genes = *std::move(child->genes);
    SKERRY_RETURN_IF_ERROR(GenomeStore::RebuildChildren(conn, &one));
  }
  return std::move(g.genes);
}

absl::StatusOr<std::optional<GenomeRecord>> GenomeStore::BestGenomeOn(
    Connection* conn, int64_t run_id) {
  SKERRY_ASSIGN_OR_RETURN(auto run_s,
                          conn->Prepare("SELECT spec FROM runs WHERE id = ?"));
  run_s.BindInt(1, run_id);
  SKERRY_ASSIGN_OR_RETURN(auto run_row, run_s.Step());
  if (!run_row)
    return absl::NotFoundError(
        absl::StrCat("run ", static_cast<uint64_t>(run_id), " not found"));
  skerry::v1::RunSpec spec;
  if (!spec.ParseFromString(run_s.ColumnBlob(0))) {
    return absl::DataLossError(
        absl::StrCat("run ", run_id, ": stored spec does not parse"));
  }
  const bool maximize = spec.objective() == skerry::v1::MAXIMIZE;
  SKERRY_ASSIGN_OR_RETURN(
      auto s,
      conn->Prepare(absl::StrCat(
          "SELECT ", GenomeColumns(),
          " FROM genomes WHERE run_id = ? AND eval_state = 2 ORDER BY score ",
          maximize ? "DESC" : "ASC", ", generation, island, slot LIMIT 1")));
  s.BindInt(1, run_id);
  SKERRY_ASSIGN_OR_RETURN(auto rows, QueryGenomes(conn, &s));
  if (rows.empty()) return std::optional<GenomeRecord>();
  return std::optional<GenomeRecord>(std::move(rows.front()));
}

absl::StatusOr<std::optional<GenomeRecord>> GenomeStore::BestGenome(
    int64_t run_id) {
  SKERRY_ASSIGN_OR_RETURN(ReadPool::Lease reader, db_->Reader());
  return BestGenomeOn(reader.get(), run_id);
}

absl::StatusOr<std::vector<GenomeRecord>> GenomeStore::FailedGenomes(
    int64_t run_id, int limit) {
  SKERRY_ASSIGN_OR_RETURN(ReadPool::Lease reader, db_->Reader());
  SKERRY_ASSIGN_OR_RETURN(
      auto s, reader->PrepareCached(absl::StrCat(
                  "SELECT ", GenomeColumns(),
                  " FROM genomes WHERE run_id = ? AND eval_state = 3 "
                  "ORDER BY id DESC LIMIT ?")));
  s.BindInt(1, run_id);
  s.BindInt(2, limit);
  return QueryGenomes(reader.get(), &s, Genes::kStored);
}

absl::StatusOr<uint64_t> GenomeStore::CountFailed(int64_t run_id) {
  SKERRY_ASSIGN_OR_RETURN(ReadPool::Lease reader, db_->Reader());
  SKERRY_ASSIGN_OR_RETURN(
      auto s,
      reader->PrepareCached("SELECT count(*) FROM genomes WHERE run_id = ? "
                            "AND eval_state = 3"));
  s.BindInt(1, run_id);
  SKERRY_ASSIGN_OR_RETURN(bool row, s.Step());
  return row ? static_cast<uint64_t>(s.ColumnInt(0)) : 0;
}

absl::StatusOr<GenomeStore::Digest> GenomeStore::RunDigest(int64_t run_id) {
  absl::StatusOr<Digest> d = RunDigestUnnamed(run_id);
  if (absl::IsDataLoss(d.status()) &&
      !absl::StartsWith(d.status().message(), absl::StrCat("run ", run_id))) {
    return absl::DataLossError(
        absl::StrCat("run ", run_id, " is damaged: ", d.status().message(),
                     "; `skerry-coordinator --check` lists the damage"));
  }
  return d;
}

absl::StatusOr<GenomeStore::Digest> GenomeStore::RunDigestUnnamed(
    int64_t run_id) {
  SKERRY_ASSIGN_OR_RETURN(ReadPool::Lease reader, db_->Reader());
  SKERRY_ASSIGN_OR_RETURN(
      auto s,
      reader->PrepareCached(absl::StrCat(
          "SELECT g.island, g.generation, g.slot, g.origin, pa.island, "
          "pa.generation, pa.slot, pb.island, pb.generation, pb.slot, g.genes, "
          "g.eval_state, g.score, g.ok, g.id, g.origin, g.parent_a, "
          "g.parent_b FROM "
          "(SELECT *, ",
          SumMatches(kGenomeSumColumns),
          " AS ok FROM genomes WHERE run_id = ?1) g "
          "LEFT JOIN genomes pa ON pa.id = g.parent_a "
          "LEFT JOIN genomes pb ON pb.id = g.parent_b "
          "ORDER BY g.island, g.generation, g.slot")));
  s.BindInt(1, run_id);
  Sha256 h;
  Digest d;
  absl::flat_hash_map<int64_t, std::vector<double>> centres;
  DigestChildren children;
  while (true) {
    SKERRY_ASSIGN_OR_RETURN(bool row, s.Step());
    if (!row) break;
    if (s.ColumnInt(13) != 1) {
      return DamagedGenome(run_id, static_cast<uint32_t>(s.ColumnInt(0)),
                           static_cast<uint32_t>(s.ColumnInt(1)),
                           static_cast<uint32_t>(s.ColumnInt(2)),
                           s.ColumnInt(14));
    }
    for (int c = 0; c < 4; ++c)
      h.UpdateU32(static_cast<uint32_t>(s.ColumnInt(c)));
    for (int c = 4; c < 10; ++c) {
      h.UpdateU32(s.ColumnIsNull(c) ? 0xFFFFFFFFu
                                    : static_cast<uint32_t>(s.ColumnInt(c)));
    }
    // The float64 form, whichever encoding the row has (common/genes.h); a
    // sample kept as its recipe is hashed as the genes it rebuilds, so the
    // digest is that of the genomes evaluated, however they are stored.
    const std::string blob = s.ColumnBlob(10);
    if (s.ColumnInt(15) == skerry::v1::DISTRIBUTION) {
      centres.clear();  // one at a time: samples follow their own
      absl::StatusOr<std::vector<double>> c = UnpackGenes(blob);
      if (c.ok()) centres[s.ColumnInt(14)] = *std::move(c);
    }
    absl::StatusOr<std::string> genes =
        IsChildRecipe(blob)
            ? children.Bytes(reader.get(), s.ColumnInt(14), blob,
                             s.ColumnInt(16), s.ColumnInt(17),
                             static_cast<uint32_t>(s.ColumnInt(0)),
                             static_cast<uint32_t>(s.ColumnInt(1)))
        : IsRecipe(blob) ? SampleBytes(reader.get(), s.ColumnInt(14), blob,
                                       s.ColumnInt(16), &centres)
                         : Float64Bytes(blob);
    if (!genes.ok() && (IsChildRecipe(blob) || IsRecipe(blob))) {
      // A recipe that cannot be rebuilt (a parent missing, say): its own
      // reason, not a checksum's, with where it is.
      return absl::DataLossError(
          absl::StrCat("run ", run_id, " island ", s.ColumnInt(0),
                       " generation ", s.ColumnInt(1), " slot ", s.ColumnInt(2),
                       ": ", genes.status().message(),
                       "; `skerry-coordinator --check` lists the damage"));
    }
    if (!genes.ok()) {
      return DamagedGenome(run_id, static_cast<uint32_t>(s.ColumnInt(0)),
                           static_cast<uint32_t>(s.ColumnInt(1)),
                           static_cast<uint32_t>(s.ColumnInt(2)),
                           s.ColumnInt(14));
    }
    h.UpdateU32(static_cast<uint32_t>(genes->size() / 8));
    h.Update(*genes);
    h.UpdateU32(static_cast<uint32_t>(s.ColumnInt(11)));
    uint64_t bits = 0;
    if (!s.ColumnIsNull(12)) {
      const double score = s.ColumnDouble(12);
      std::memcpy(&bits, &score, 8);
    }
    h.UpdateU64(bits);
    ++d.genomes;
  }
  d.sha256 = h.FinishHex();
  return d;
}

}  // namespace skerry::store
