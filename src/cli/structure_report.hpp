// Words for a chain's structure: the `check` report and the one-line reason that
// `solve` gives when there is no unique stationary distribution.
#pragma once

#include "analysis/structure.hpp"
#include "io/chain.hpp"

#include <mpi.h>
#include <nlohmann/json.hpp>

#include <string>
#include <vector>

namespace longrun::cli {

// Collective: "state 17 (q1=3, q2=0)" for each requested global state, from the
// ranks that own them.
std::vector<std::string> describe_states(MPI_Comm comm, const io::Chain& slice,
                                         const std::vector<std::uint64_t>& states);

struct StructureWords {
    nlohmann::json json;
    std::string text;
    std::string verdict; // one line
};

// Collective (describes representatives).
StructureWords describe_structure(MPI_Comm comm, const io::Chain& slice,
                                  const analysis::Structure& s);

solve::LocalRows local_rows_of(const io::Chain& chain);

} // namespace longrun::cli
