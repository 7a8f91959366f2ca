// `gauss-seidel`: placeholder until the method lands.
#include "method.hpp"

namespace longrun::solve {

Attempt run_gauss_seidel(const TransposedChain&, Vec, const MethodSettings&) {
    throw MethodDeclined("method 'gauss-seidel' is not built yet");
}

} // namespace longrun::solve
