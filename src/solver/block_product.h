/**
 * @file block_product.h  A sparse matrix times a block of columns, reading the
 * matrix once per block (solver sources only).
 */
#pragma once

#include "petsc_handle.h"

#include <map>
#include <vector>

namespace alloyspec::internal
{
  /**
   * Y = A X for a PETSc AIJ matrix A (one process: SeqAIJ; a team: MPIAIJ)
   * and a block X of b columns of this process's rows, column-major as the
   * eigen-solvers keep their blocks.
   *
   * Why not PETSc's MatMatMult: its AIJ-times-dense kernel walks the rows of
   * A once for every few columns and reads each column of X with stride n,
   * so a block of b columns reads A about b/4 times. Here X is transposed to
   * row-major (each row's b values adjacent) and
   * @f$Y_{i,:} = \sum_j A_{ij} X_{j,:}@f$ is formed row by row (Eigen's
   * row-major sparse times row-major dense product, vectorised across the b
   * columns), so A is read once. On a team, A's rows are PETSc's split
   * @f$A = A_d + A_o@f$ (owned columns, ghost columns), and the ghost rows of
   * X arrive through one VecScatter of b-wide blocks built from A's own list
   * of ghost columns; the scatter is kept per block width.
   *
   * The matrix's values may change between calls (a new realisation), its
   * pattern not: construct a new product for a new pattern.
   */
  class BlockProduct
  {
  public:
    /** Keeps @p A (not owned; it must outlive this object). */
    explicit BlockProduct(Mat A);
    ~BlockProduct();
    BlockProduct(const BlockProduct &)            = delete;
    BlockProduct &operator=(const BlockProduct &) = delete;

    /** out = A in, for @p b columns of n_local rows, column-major. Collective on a team. */
    void operator()(const double *in, double *out, unsigned int b) const;

  private:
    Mat                         a_;
    Mat                         owned_ = nullptr, ghost_ = nullptr;
    const PetscInt             *ghost_columns_ = nullptr;
    PetscInt                    n_local_ = 0, n_ghost_ = 0;
    bool                        team_    = false;
    mutable std::map<unsigned int, OwnedScatter> scatters_;
    /** The block in row-major order, kept for the next product. */
    mutable std::vector<double>                  rows_scratch_;
  };
} // namespace alloyspec::internal
