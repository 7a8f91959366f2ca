#pragma once

#include "petsc_error.hpp"

#include <petscksp.h>
#include <petscmat.h>
#include <petscvec.h>
#include <slepceps.h>

namespace longrun::solve {

using MatHandle = PetscHandle<Mat, MatDestroy>;
using VecHandle = PetscHandle<Vec, VecDestroy>;
using KspHandle = PetscHandle<KSP, KSPDestroy>;
using EpsHandle = PetscHandle<EPS, EPSDestroy>;
using IsHandle = PetscHandle<IS, ISDestroy>;
using ScatterHandle = PetscHandle<VecScatter, VecScatterDestroy>;

} // namespace longrun::solve
