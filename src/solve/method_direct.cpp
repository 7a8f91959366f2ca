// `direct`: placeholder until the method lands.
#include "method.hpp"

namespace longrun::solve {

Attempt run_direct(const TransposedChain&, Vec, const MethodSettings&) {
    throw MethodDeclined("method 'direct' is not built yet");
}

} // namespace longrun::solve
