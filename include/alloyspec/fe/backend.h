/** @file backend.h  The one place that names the linear-algebra backend. */
#pragma once

#include <deal.II/lac/petsc_sparse_matrix.h>

#include <vector>

namespace alloyspec::backend
{
  /**
   * Serial sparse matrix (PETSc AIJ). Each rank assembles its problems on
   * PETSC_COMM_SELF; when several ranks share one realisation, the solver
   * works on a row-distributed copy (team.h).
   */
  using SparseMatrix = dealii::PETScWrappers::SparseMatrix;

  /** Sparse matrix distributed by rows (PETSc MPIAIJ): the pencil of a distributed mesh. */
  using DistributedSparseMatrix = dealii::PETScWrappers::MPI::SparseMatrix;

  /**
   * Non-owning handles of a pencil's two matrices (K, M): the serial ones of
   * a SpectralProblem, or a copy distributed by rows over a team of ranks
   * (RealisationTeams::distributed).
   */
  struct MatrixPair
  {
    Mat K = nullptr;
    Mat M = nullptr;
  };

  /**
   * Dense row-major copy (n × n entries) of a small matrix, for cross-checks
   * against dense reference solvers (verify, tests). Only for a few thousand rows.
   */
  inline std::vector<double> dense_row_major(const SparseMatrix &A)
  {
    const Mat m = A;
    PetscInt  n = 0;
    MatGetSize(m, &n, nullptr);
    std::vector<double> dense(static_cast<std::size_t>(n) * n, 0.0);
    for (PetscInt i = 0; i < n; ++i)
      {
        PetscInt           nc   = 0;
        const PetscInt    *cols = nullptr;
        const PetscScalar *vals = nullptr;
        MatGetRow(m, i, &nc, &cols, &vals);
        for (PetscInt j = 0; j < nc; ++j)
          dense[static_cast<std::size_t>(i) * n + cols[j]] = vals[j];
        MatRestoreRow(m, i, &nc, &cols, &vals);
      }
    return dense;
  }
} // namespace alloyspec::backend
