// Chains with several closed classes: each closed class is a chain of its own
// (nothing leaves it), and from a given start the long-run distribution is the
// mixture of the classes' stationary laws weighted by the probabilities of
// ending up in each class (absorption probabilities from the transient states).
#pragma once

#include "assemble.hpp"
#include "method.hpp"

#include <mpi.h>

#include <cstdint>
#include <vector>

namespace longrun::solve {

inline constexpr std::uint32_t transient_class = 0xffffffffu;

// Position of each state within its class (transient states: within the
// transient set), so that a class's states are numbered 0.. in chain order.
std::vector<std::uint32_t> positions_within_classes(const std::vector<std::uint32_t>& class_of);

// This rank's rows of one closed class as a chain of its own. The rows stay
// contiguous and in rank order, so the sub-chain keeps the parent's ownership.
struct ClassChain {
    std::uint64_t size = 0;
    std::vector<std::uint64_t> local_states; // global indices of this rank's rows in the class
    std::vector<std::uint64_t> offsets{0}, targets;
    std::vector<double> weights;
    LocalRows rows() const;
    RowRange positions;
    TimeModel time = TimeModel::continuous;
};

ClassChain restrict_to_class(MPI_Comm comm, const LocalRows& full,
                             const std::vector<std::uint32_t>& class_of,
                             const std::vector<std::uint32_t>& position, std::uint32_t k);

struct Absorption {
    std::vector<double> probability; // per closed class
    long iterations = 0;
    double residual = 0; // relative residual of the transient system
};

// Collective. `start` is this rank's part of the start distribution (full chain
// order, summing to 1 over all ranks). Solves x (I - P_TT) = start_T (dtmc) or
// x (-Q_TT) = start_T (ctmc) with GMRES (options prefix -absorb_), then the
// probability of class k is start(C_k) + sum_t x_t * (rate or probability from t
// into C_k).
Absorption absorption_probabilities(MPI_Comm comm, const TransposedChain& a, const LocalRows& full,
                                    const std::vector<std::uint32_t>& class_of, std::size_t classes,
                                    const std::vector<double>& start,
                                    const MethodSettings& settings);

} // namespace longrun::solve
