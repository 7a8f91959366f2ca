// `aggregation`: placeholder until the method lands.
#include "method.hpp"

namespace longrun::solve {

Attempt run_aggregation(const TransposedChain&, Vec, const MethodSettings&) {
    throw MethodDeclined("method 'aggregation' is not built yet");
}

} // namespace longrun::solve
