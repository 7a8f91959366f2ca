// The whole `solve` job without the command line: load, assemble, solve,
// certify, summarise, write. The CLI formats what this returns; tests call it
// directly (with forced partitions, for instance).
#pragma once

#include "analysis/structure.hpp"
#include "io/chain_file.hpp"
#include "io/result_file.hpp"
#include "solve/method.hpp"
#include "solve/strategy.hpp"
#include "solve_layout.hpp"
#include "summary/marginals.hpp"

#include <mpi.h>

#include <optional>
#include <string>
#include <vector>

namespace longrun::cli {

struct SolveRequest {
    std::string chain_path;
    std::optional<std::string> output;
    std::string method = "auto";
    double tolerance = 1e-10;      // on the estimated error ||pi_hat - pi||_1
    double residual_tolerance = 0; // > 0: certify on the residual (--residual-tol)
    io::ValidationOptions validation;
    solve::LinearPreconditioner preconditioner = solve::LinearPreconditioner::amg;
    bool progress = true;
    std::optional<RowRange> forced_rows; // tests: override the partition
    // Rows during the solve: contiguous blocks, a graph partition, or auto.
    // contiguous unless asked: PT-Scotch cannot help a chain without locality and
    // costs more than the solve there (benchmarks/RESULTS.md, the 10^6 graph walk).
    partition::Layout partition = partition::Layout::contiguous;
    bool analyse_structure = true; // off only for chains too large to gather
    // Several closed classes: solve each on its own instead of stopping (exit 3).
    bool per_class = false;
    // With per_class: where the chain starts, for the absorption probabilities and
    // the long-run mixture. One state, or a file with a /distribution dataset.
    std::optional<std::uint64_t> start_state;
    std::optional<std::string> start_distribution;
    // Warm start: /distribution of an earlier result or checkpoint of this chain.
    std::optional<std::string> warm_start;
    // Also from a result of another chain with as many states (the previous point
    // of a parameter sweep); otherwise such a warm start is refused.
    bool warm_start_other_chain = false;
    // Write the current iterate to this file every `checkpoint_every` seconds.
    std::optional<std::string> checkpoint;
    double checkpoint_every = 300;
    // Continue from this checkpoint when it exists (and keep checkpointing into
    // it unless `checkpoint` names another file); start afresh when it does not.
    std::optional<std::string> resume;
    // Mass at a declared bound above this is reported as a possible truncation bias.
    double truncation_threshold = 1e-6;
};

// Probability at a state variable's declared bound: large mass at the bound where
// the state space was cut off means the cut biases the answer.
struct TruncationNote {
    std::string variable;
    bool upper = true;
    double bound = 0;
    double mass = 0;
    bool warn = false;
};

struct ClassOutcome {
    std::uint64_t size = 0;
    std::uint64_t period = 0;
    std::vector<std::string> representatives; // described with variable values
    std::string method;
    long iterations = 0;
    double residual = 0;
    double error_estimate = 0;
    std::optional<double> probability; // of ending in this class, given a start
};

struct SolveReport {
    std::string chain_path;
    std::string chain_hash; // io/chain_hash.hpp, recorded in the result
    io::ChainKind kind = io::ChainKind::ctmc;
    std::uint64_t states = 0, transitions = 0;
    int ranks = 1;
    io::ValidationReport validation;
    std::optional<analysis::Structure> structure;
    std::string structure_verdict;
    std::vector<ClassOutcome> classes; // per-class solve only
    std::string start_description;     // per-class solve with a start
    long absorption_iterations = 0;
    double absorption_residual = 0;
    bool has_distribution = true; // false: per-class without a start
    std::vector<solve::AttemptRecord> attempts;
    std::vector<std::string> plan; // methods in the order auto meant to try them
    std::string plan_reason;
    std::string start_from; // how the iteration was started (warm start, resume)
    std::optional<double> start_residual;
    long checkpoints_written = 0;
    std::string method;
    long iterations = 0;
    solve::Certificate certificate;
    double tolerance = 0;
    double residual_tolerance = 0; // > 0: certified on the residual
    bool certified() const { return certificate.meets(tolerance, residual_tolerance); }
    std::string residual_definition;
    double wall_seconds = 0;
    // Seconds per phase in the order they ran (rank 0's clock; every phase ends in
    // a collective call, so it is also the slowest rank's): where a run's time goes
    // and which phases scale with the rank count.
    std::vector<std::pair<std::string, double>> phase_seconds;
    std::uint64_t peak_memory_bytes = 0;
    std::vector<summary::Marginal> variables;
    std::vector<TruncationNote> truncation;
    std::optional<double> detailed_balance_violation; // max relative violation
    bool reversible = false;
    std::string reversibility_verdict;
    double truncation_threshold = 0;
    std::optional<std::string> output;
    PartitionOutcome partition;
    RowRange rows;                // this rank's rows
    std::vector<double> local_pi; // this rank's entries of the distribution
};

// The integer state variables of this rank's rows, for methods that group states.
solve::StateCoordinates coordinates_of(const io::Chain& chain);

// What auto looks at: size, kind, ranks, the analysis (period, near
// decomposability; may be null) and the memory per rank (collective).
solve::ChainTraits traits_of(MPI_Comm comm, const io::Chain& chain, solve::TimeModel time,
                             const analysis::Structure* structure);

// Collective. Throws NumericalError (exit 4) when no method met the certificate;
// nothing is written then.
SolveReport run_solve(MPI_Comm comm, const SolveRequest& request);

// Largest resident set size over the ranks so far, in bytes (collective).
std::uint64_t peak_memory_bytes(MPI_Comm comm);

} // namespace longrun::cli
