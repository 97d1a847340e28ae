/** @file backend.h  The one place that names the linear-algebra backend. */
#pragma once

#include <deal.II/lac/petsc_sparse_matrix.h>

namespace alloyspec::backend
{
  /**
   * Serial sparse matrix (PETSc AIJ). Realisations are distributed over MPI
   * ranks, each solving its own problems on PETSC_COMM_SELF, so the matrices
   * themselves are not distributed.
   */
  using SparseMatrix = dealii::PETScWrappers::SparseMatrix;
} // namespace alloyspec::backend
