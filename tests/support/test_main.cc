// GoogleTest entry point shared by all unit tests: MPI, PETSc and SLEPc are
// initialised once (deal.II's MPI_InitFinalize does all three) so that tests
// of the solver classes run as they do inside the program.
#include <deal.II/base/mpi.h>

#include <gtest/gtest.h>

#include <cstdlib>
#include <dlfcn.h>

int main(int argc, char **argv)
{
  ::testing::InitGoogleTest(&argc, argv);
  // One BLAS thread, as the program sets it (src/main.cc): tests run two at a
  // time, and threaded dense products inside them only contend.
  if (std::getenv("OPENBLAS_NUM_THREADS") == nullptr)
    if (void *setter = dlsym(RTLD_DEFAULT, "openblas_set_num_threads"))
      reinterpret_cast<void (*)(int)>(setter)(1);
  dealii::Utilities::MPI::MPI_InitFinalize mpi(argc, argv, 1);
  return RUN_ALL_TESTS();
}
