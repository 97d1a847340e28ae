// alloyspec: spectra and integrated density of states of random Schrödinger
// operators -Δ + V_ω on boxes of unit cells. The driver only initialises MPI,
// PETSc and SLEPc; everything else lives in the library.
#include <alloyspec/command_line.h>

#include <deal.II/base/mpi.h>

int main(int argc, char **argv)
{
  dealii::Utilities::MPI::MPI_InitFinalize mpi(argc, argv, 1);
  return alloyspec::run_command_line(argc, argv);
}
