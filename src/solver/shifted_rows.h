/** @file shifted_rows.h  The rows of K − σM from a PETSc pair (solver sources only). */
#pragma once

#include "petsc_handle.h"

#include <algorithm>
#include <stdexcept>
#include <vector>

namespace alloyspec::internal
{
  /**
   * Calls @p row(i, columns, values) for every row i of @f$K - \sigma M@f$
   * this process owns, in order, with the row's column indices and values.
   * K and M share one sparsity pattern (SpectralProblem), so their rows align
   * entry by entry; a pair whose rows do not align throws std::runtime_error.
   */
  template <typename Row>
  void for_each_shifted_row(Mat K, Mat M, const double sigma, Row &&row)
  {
    PetscInt first = 0, last = 0;
    ALLOYSPEC_CHECK(MatGetOwnershipRange(K, &first, &last));
    std::vector<PetscInt> columns;
    std::vector<double>   values;
    for (PetscInt i = first; i < last; ++i)
      {
        PetscInt           nk = 0, nm = 0;
        const PetscInt    *kc = nullptr, *mc = nullptr;
        const PetscScalar *kv = nullptr, *mv = nullptr;
        ALLOYSPEC_CHECK(MatGetRow(K, i, &nk, &kc, &kv));
        ALLOYSPEC_CHECK(MatGetRow(M, i, &nm, &mc, &mv));
        const bool aligned = nk == nm && std::equal(kc, kc + nk, mc);
        if (aligned)
          {
            columns.assign(kc, kc + nk);
            values.resize(static_cast<std::size_t>(nk));
            for (PetscInt c = 0; c < nk; ++c)
              values[std::size_t(c)] = kv[c] - sigma * mv[c];
          }
        ALLOYSPEC_CHECK(MatRestoreRow(M, i, &nm, &mc, &mv));
        ALLOYSPEC_CHECK(MatRestoreRow(K, i, &nk, &kc, &kv));
        if (!aligned)
          throw std::runtime_error("algebraic multigrid: K and M do not share one sparsity pattern");
        row(i, columns, values);
      }
  }
} // namespace alloyspec::internal
