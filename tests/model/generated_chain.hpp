// Shared by the model tests: the stationary vector of a generated chain (GTH,
// exact enough for closed-form checks) and a state variable by name.
#pragma once

#include "io/chain.hpp"
#include "solve/gth.hpp"

#include <stdexcept>
#include <string>
#include <vector>

namespace longrun::model_testing {

inline std::vector<double> stationary(const io::Chain& c) {
    solve::LocalRows rows{c.kind == io::ChainKind::ctmc ? solve::TimeModel::continuous
                                                        : solve::TimeModel::discrete,
                          c.states,
                          c.rows,
                          c.offsets,
                          c.targets,
                          c.weights};
    return solve::gth_stationary(rows);
}

inline const io::StateVariable& variable(const io::Chain& c, const std::string& name) {
    for (const auto& v : c.variables)
        if (v.name == name)
            return v;
    throw std::runtime_error("no variable " + name);
}

} // namespace longrun::model_testing
