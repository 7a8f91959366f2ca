// `gth`: placeholder until the method lands.
#include "method.hpp"

namespace longrun::solve {

Attempt run_gth(const TransposedChain&, Vec, const MethodSettings&) {
    throw MethodDeclined("method 'gth' is not built yet");
}

} // namespace longrun::solve
