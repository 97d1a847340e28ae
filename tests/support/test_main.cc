// GoogleTest entry point shared by all unit tests: MPI, PETSc and SLEPc are
// initialised once (deal.II's MPI_InitFinalize does all three) so that tests
// of the solver classes run as they do inside the program.
#include <deal.II/base/mpi.h>

#include <gtest/gtest.h>

int main(int argc, char **argv)
{
  ::testing::InitGoogleTest(&argc, argv);
  dealii::Utilities::MPI::MPI_InitFinalize mpi(argc, argv, 1);
  return RUN_ALL_TESTS();
}
