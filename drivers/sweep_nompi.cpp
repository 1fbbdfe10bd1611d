//! The MPI engine's stand-in, linked into `thermorph` (the MPI engine is linked into `thermorph-mpi` only, so
//! that `thermorph` never loads the MPI libraries; see CMakeLists.txt).
#include "drivers/sweep.hpp"
#include "drivers/sweep_engine.hpp"
#include "models/case.hpp"

namespace thermorph {

int runSweepMpi(const SweepOptions&) {
  throw CaseError("thermorph runs sweeps on local threads only; for MPI ranks launch thermorph-mpi instead: "
                  "mpirun -np N thermorph-mpi sweep ... (or sensitivity ...; built when MPI is found, see README); or run "
                  "without mpirun, on local cores with -j N");
}

bool sweepHasMpi() { return false; }

}  // namespace thermorph
