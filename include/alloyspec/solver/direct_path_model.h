/** @file direct_path_model.h  Size and memory of the direct (shift-and-invert) path, before it runs. */
#pragma once

#include <cstddef>
#include <vector>

namespace alloyspec
{
  /** What one eigen-solve of a box on the direct path is expected to hold. */
  struct DirectPathEstimate
  {
    std::size_t dofs           = 0; ///< unknowns, constrained ones included
    std::size_t elements       = 0; ///< mesh cells
    std::size_t matrix_entries = 0; ///< stored entries of K (and of M: same pattern)
    double      factor_entries = 0; ///< modelled entries of the MUMPS factor of K − σM
    double      bytes          = 0; ///< modelled peak resident memory of the process
  };

  /**
   * Sizes of FE_Q(p) with @p r elements per cell edge on a box of @p cells
   * cells per direction, solved for @p n_eigenvalues eigenpairs on the direct
   * path.
   *
   * Exact counts on the tensor mesh: per direction @f$n_e = rL@f$ elements and
   * @f$n = p n_e + 1@f$ nodes (constrained nodes of Dirichlet faces and
   * periodic images included, as the matrices hold them), and, since two
   * nodes couple exactly when in every direction they share an element, the
   * pattern of K is the Kronecker product of the 1D patterns with
   * @f$n_e (p+1)^2 - (n_e - 1)@f$ entries. Periodic directions add the few
   * couplings across the wrap, which the model leaves out.
   *
   * Modelled, from measurements of MUMPS with the PORD ordering on this
   * project's matrices (74 runs, d = 1, 2, 3, p = 1…4, r = 1, 2, 4; README,
   * *Choosing the discretisation*): factor entries
   * @f$F \le c_d\,g_d(N)@f$ with @f$g_1 = N@f$, @f$g_2 = N\log_2 N@f$,
   * @f$g_3 = N^{4/3}@f$ (the nested-dissection growth: the top separator of a
   * 3D grid is a dense front of @f$N^{2/3}@f$ unknowns; A. George, SIAM J.
   * Numer. Anal. 10 (1973) 345) and the largest measured constants
   * @f$c_1 = 3.5@f$, @f$c_2 = 2.9@f$, @f$c_3 = 12.9@f$; and peak memory
   * @f$173\,\mathrm{MiB} + 2450\,n_{el} + 81.5\,\mathrm{nnz} + 10.1\,F + 77\,kN@f$
   * bytes (least squares over the same runs; measured/modelled 0.93–1.15),
   * times @ref memory_model_safety.
   */
  DirectPathEstimate estimate_direct_path(const std::vector<unsigned int> &cells,
                                          unsigned int degree, unsigned int elements_per_cell,
                                          unsigned int n_eigenvalues);

  /** Margin on the modelled memory: the largest measured/modelled ratio was 1.15. */
  constexpr double memory_model_safety = 1.25;
} // namespace alloyspec
