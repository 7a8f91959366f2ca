#include "certificate.hpp"

#include <fmt/format.h>

#include <cmath>

namespace longrun::solve {

std::string residual_definition(TimeModel time) {
    return time == TimeModel::discrete ? "||pi P - pi||_1" : "||pi Q||_1 / max_i |q_ii|";
}

double residual_of(const TransposedChain& a, Vec x) {
    VecHandle y;
    check(VecDuplicate(x, y.out()), "VecDuplicate");
    check(MatMult(a.matrix, x, y), "MatMult");
    if (a.time == TimeModel::discrete)
        check(VecAXPY(y, -1.0, x), "VecAXPY");
    PetscReal norm = 0;
    check(VecNorm(y, NORM_1, &norm), "VecNorm");
    return a.time == TimeModel::discrete ? norm : norm / a.uniformisation;
}

Certificate certify(const TransposedChain& a, Vec x) {
    Certificate c;
    PetscScalar sum = 0;
    check(VecSum(x, &sum), "VecSum");
    if (!std::isfinite(sum) || sum == 0) {
        c.problem = "the iterate is zero or not finite";
        c.residual = INFINITY;
        return c;
    }
    // An eigenvector may come out with either sign; the sum fixes it.
    check(VecScale(x, 1.0 / sum), "VecScale");
    PetscInt where = 0;
    PetscReal min_entry = 0;
    check(VecMin(x, &where, &min_entry), "VecMin");
    c.min_entry = min_entry;
    if (!std::isfinite(min_entry)) {
        c.problem = "the iterate has entries that are not finite";
        c.residual = INFINITY;
        return c;
    }
    if (min_entry < 0) {
        PetscScalar* v = nullptr;
        PetscInt n = 0;
        check(VecGetLocalSize(x, &n), "VecGetLocalSize");
        check(VecGetArray(x, &v), "VecGetArray");
        double clipped = 0;
        for (PetscInt i = 0; i < n; ++i)
            if (v[i] < 0) {
                clipped -= v[i];
                v[i] = 0;
            }
        check(VecRestoreArray(x, &v), "VecRestoreArray");
        double total = 0;
        MPI_Allreduce(&clipped, &total, 1, MPI_DOUBLE, MPI_SUM, PetscObjectComm((PetscObject)x));
        c.clipped_mass = total;
        check(VecSum(x, &sum), "VecSum");
        check(VecScale(x, 1.0 / sum), "VecScale");
    }
    check(VecSum(x, &sum), "VecSum");
    c.norm_error = std::abs(sum - 1.0);
    c.residual = residual_of(a, x);
    if (!std::isfinite(c.residual)) {
        c.problem = "the residual is not finite";
        return c;
    }
    if (c.min_entry < negative_entry_limit) {
        c.problem = fmt::format("entry {} is negative ({:.3e})", where, c.min_entry);
        return c;
    }
    c.valid = true;
    return c;
}

} // namespace longrun::solve
