/** @file spectral_problem.h  The matrix pair (K, M) of one generalised eigenproblem. */
#pragma once

#include <alloyspec/fe/backend.h>

#include <algorithm>
#include <cstddef>
#include <vector>

namespace alloyspec
{
  /**
   * @f$K u = \lambda M u@f$ with @f$K = A + \sum_n q_n M_n@f$ (stiffness plus
   * potential) and @f$M@f$ the mass matrix, both symmetric with the same
   * sparsity pattern, M positive definite. Rows of constrained DoFs are
   * decoupled and carry the eigenvalue @c spurious_eigenvalue only.
   */
  struct SpectralProblem
  {
    backend::SparseMatrix K;
    backend::SparseMatrix M;
    /**
     * Per DoF, or on a distributed mesh per owned row: entry i is row
     * first_row + i.
     */
    std::vector<bool>     constrained;
    /**
     * A problem of a distributed mesh (Discretisation::create_distributed):
     * its pencil is K_parts, M_parts, distributed by rows over the mesh's
     * communicator (K and M stay empty), and constrained covers the owned rows.
     */
    bool                             distributed = false;
    backend::DistributedSparseMatrix K_parts, M_parts;
    std::size_t                      first_row    = 0; ///< global index of constrained[0]
    std::size_t                      genuine_rows = 0; ///< distributed: unconstrained rows of all ranks
    double                spurious_eigenvalue = 0;
    double                lower_bound = 0;    ///< every eigenvalue is ≥ this (min of the potential)
    /**
     * Every genuine eigenvalue is ≤ this: @f$\lambda_{\max}(A, M) + \max q@f$,
     * with the element-by-element bound on @f$\lambda_{\max}(A, M)@f$; 0 if unknown.
     */
    double                upper_bound = 0;
    /**
     * μ_M > 0 with @f$x^T M x \ge \mu_M\,x^T x@f$ for every x that vanishes on
     * the constrained rows: the smallest eigenvalue over the element mass
     * matrices (@f$x^T M x = \sum_e x_e^T M_e x_e \ge \min_e \lambda_{\min}(M_e)
     * \sum_e |x_e|^2 \ge \min_e \lambda_{\min}(M_e)\,|x|^2@f$, every DoF lying
     * in some element; constraints only repeat entries). 0 if unknown.
     * Bounds @f$M^{-1}@f$ for the eigenvalue enclosures.
     */
    double                mass_floor = 0;

    /**
     * Eigenvalues at or above this belong to the constrained rows: the midpoint
     * between the genuine spectrum's bound and the constrained rows' value.
     * Half the constrained value alone (the rule used before) lies below the
     * genuine spectrum once the potential is large: with q ≡ 1000 on a Q1 mesh
     * every genuine eigenvalue (≥ 1000) was above it and the list came back
     * empty, so the inertia check could never agree.
     */
    double spurious_threshold() const
    {
      return upper_bound > 0 && upper_bound < spurious_eigenvalue ?
               0.5 * (upper_bound + spurious_eigenvalue) :
               0.5 * spurious_eigenvalue;
    }

    /** Number of genuine eigenvalues: the DoFs that are not constrained (all lie below μ). */
    std::size_t n_genuine() const
    {
      if (distributed)
        return genuine_rows;
      return static_cast<std::size_t>(std::count(constrained.begin(), constrained.end(), false));
    }

    /** The pencil's stiffness matrix: K, or K_parts of a distributed mesh. */
    Mat stiffness() const { return distributed ? Mat(K_parts) : Mat(K); }
    /** The pencil's mass matrix: M, or M_parts of a distributed mesh. */
    Mat mass() const { return distributed ? Mat(M_parts) : Mat(M); }
  };
} // namespace alloyspec
