// Graphviz DOT export of an ancestry subgraph: one node per genome, coloured by
// island (Skerry's own palette, kIslandPalette), an edge from each parent to
// its child labelled by the child's origin (parent b's edge dashed), and the
// line of descent drawn bold. Only genomes handed in appear; an edge appears
// when both its ends do.
//
// Invariant: the output is a pure function of the arguments (nodes are written
// in the order given, edges in child order), so tests hold it to fixed text.
// Thread safety: pure functions.
#ifndef SKERRY_SERVER_LINEAGE_DOT_H_
#define SKERRY_SERVER_LINEAGE_DOT_H_

#include <string>
#include <vector>

#include "absl/strings/string_view.h"
#include "skerry/v1/lineage.pb.h"

namespace skerry::lineage {

// Fill colours by island index modulo their count.
inline constexpr const char* kIslandPalette[] = {
    "#9ccfd8",  // shallow water
    "#e8c07d",  // sand
    "#a3c585",  // kelp
    "#d7a3c8",  // sea thrift
    "#f0a07a",  // lichen
    "#b9b3e6",  // dusk
    "#e6e29a",  // gorse
    "#8fb8a8",  // sea glass
    "#d9b8a0",  // driftwood
    "#c4d7ec",  // spray
};

// `genome` is the genome asked about, `ancestors` its ancestors within the
// depth limit, `line` its line of descent (steps[0] the genome). `title`
// becomes the graph's label.
std::string AncestryDot(const skerry::v1::LineageNode& genome,
                        const std::vector<skerry::v1::LineageNode>& ancestors,
                        const std::vector<skerry::v1::LineageNode>& line,
                        absl::string_view title);

// "seeded", "elite", "crossover", "mutation", "immigrant", "migrant", or
// "origin N" for a number this version does not know.
std::string OriginLabel(skerry::v1::Origin origin);

}  // namespace skerry::lineage

#endif  // SKERRY_SERVER_LINEAGE_DOT_H_
