// alloyspec: spectra and integrated density of states of random Schrödinger
// operators -Δ + V_ω on boxes of unit cells. The driver only initialises MPI,
// PETSc and SLEPc; everything else lives in the library.
#include <alloyspec/app/command_line.h>

#include <deal.II/base/mpi.h>

#include <cstdlib>

#include <dlfcn.h>

int main(int argc, char **argv)
{
  // Parallelism comes from realisations and MPI ranks; threaded BLAS inside
  // MUMPS only adds contention (measured: the same wall time with 3x the CPU
  // time). OpenBLAS reads its variable before main, so set it through its API,
  // unless the user chose a thread count.
  if (std::getenv("OPENBLAS_NUM_THREADS") == nullptr)
    if (void *setter = dlsym(RTLD_DEFAULT, "openblas_set_num_threads"))
      reinterpret_cast<void (*)(int)>(setter)(1);
  dealii::Utilities::MPI::MPI_InitFinalize mpi(argc, argv, 1);
  return alloyspec::run_command_line(argc, argv);
}
