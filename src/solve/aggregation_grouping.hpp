// How the states of one level are grouped into aggregates for the next. Two
// ways: from the chain's integer state variables (halve the variables along
// which the chain moves strongly, so that a grid coarsens geometrically and weak
// couplings stay between aggregates), or from strong connections of the matrix
// alone (neighbourhood aggregation, De Sterck, Manteuffel, McCormick et al.,
// "Multilevel adaptive aggregation for Markov chains", SIAM J. Sci. Comput.
// 2008). Aggregates never span ranks.
#pragma once

#include "aggregation_level.hpp"

#include <string>

namespace longrun::solve {

struct Grouping {
    std::vector<PetscInt> aggregate; // per local row: local aggregate 0..count-1
    PetscInt count = 0;
    std::vector<std::vector<std::int64_t>> coordinates; // of the aggregates; may be empty
    std::string how;                                    // for the notes
};

// Collective. Halves each variable whose moves carry at least `variable_strength`
// times the rate of the strongest variable's moves. count == level.local when no
// variable can be halved any more.
Grouping group_by_coordinates(const AggregationLevel& level, double variable_strength);

// Local. j is a strong neighbour of i when |a_ij| >= theta * max_k |a_ik| (k != i),
// either way round; only columns this rank owns take part.
Grouping group_by_strength(const AggregationLevel& level, double theta);

} // namespace longrun::solve
