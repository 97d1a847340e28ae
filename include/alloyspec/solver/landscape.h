/**
 * @file landscape.h  Landscape estimate of the IDS and of the lowest
 * eigenvalues from one linear solve per realisation, instead of an eigen-solve.
 */
#pragma once

#include <cstdint>
#include <optional>
#include <string>
#include <vector>

namespace dealii
{
  class ParameterHandler;
}

namespace alloyspec
{
  class Discretisation;
  struct SpectralProblem;

  /** Subsection `landscape`. */
  struct LandscapeSettings
  {
    /** σ ≥ 0 in the user's energy unit; empty: default_landscape_shift(). */
    std::optional<double> shift;
    /** Relative residual @f$\|b - Ku\|/\|b\|@f$ at which the CG iteration stops. */
    double                tolerance = 1e-10;
    /** Eigenvalue estimates written per realisation and boundary condition. */
    unsigned int          estimates = 10;

    static void declare_parameters(dealii::ParameterHandler &prm);
    /** Reads subsection `landscape`; InputError naming the entry for a bad value. */
    void parse_parameters(dealii::ParameterHandler &prm);
  };

  /**
   * The shift used when none is given: @f$\sigma = \max(0, -q_{\min}) + 10^{-2}
   * \max(q_{\max} - q_{\min}, |q_{\max}|, 1)@f$ (solver units). The landscape
   * needs @f$H + \sigma > 0@f$ with a potential ≥ 0 (positive on a set of positive
   * measure, so that the Neumann problem is solvable); the small extra amount
   * keeps the Neumann problem away from singular when all q = 0 (common practice,
   * no source).
   */
  double default_landscape_shift(double q_min, double q_max);

  /** One landscape solve: @f$u@f$ of @f$(H+\sigma)u = 1@f$ and what follows from it. */
  struct LandscapeField
  {
    /**
     * DoF values of u, completed (periodic images, Dirichlet zeros); on a
     * distributed mesh this rank's rows, uncompleted (its quadrature_values()
     * completes them).
     */
    std::vector<double> u;
    double              shift = 0;
    /**
     * Local minima of the effective potential @f$W = 1/u - \sigma@f$ (at DoFs
     * where u is at least as large as at every coupled DoF), ascending.
     */
    std::vector<double> minima;
    unsigned int        iterations = 0;
    double              relative_residual = 0;
  };

  /**
   * Solves @f$(-\Delta + V + \sigma)u = 1@f$ with the boundary conditions of
   * @p discretisation (Dirichlet: u = 0; Neumann: natural; periodic) by
   * conjugate gradients preconditioned with algebraic multigrid (Trilinos ML,
   * the eigen-solver's ShiftedAmg at σ = 0), on a serial or a distributed mesh
   * (then collective over its ranks; the minima are gathered on every rank,
   * at most 1000 per rank),
   * @p cell_values in solver units, @p shift σ ≥ 0 (solver units) such that
   * @f$V+\sigma \ge 0@f$. @p problem is overwritten with @f$K = A + \sum_n(q_n+\sigma)M_n@f$.
   * Throws std::runtime_error when CG does not reach @p tolerance.
   */
  LandscapeField solve_landscape(const Discretisation &discretisation, SpectralProblem &problem,
                                 const std::vector<double> &cell_values, double shift,
                                 double tolerance);

  /**
   * Landscape count times the volume,
   * @f$|\Omega|\,N_W(E) = \int_\Omega \frac{\omega_d}{(2\pi)^d}(E - W(x))_+^{d/2}\,dx@f$
   * (in 3D @f$(E-W)_+^{3/2}/(6\pi^2)@f$), by Gauss quadrature, for each of
   * @p energies (solver units). Where u ≤ 0 (a Dirichlet face), W = ∞ and
   * nothing is counted. On a distributed mesh collective, summed over its ranks.
   * (Arnold, David, Filoche, Jerison, Mayboroda, SIAM J. Sci. Comput. 41 (2019) B69–B92.)
   */
  std::vector<double> landscape_counts(const Discretisation &discretisation, unsigned int dimension,
                                       const LandscapeField &field,
                                       const std::vector<double> &energies);

  /**
   * Estimates of the lowest eigenvalues from the minima of W: the rule
   * @f$\lambda \approx (1 + d/4)\,W_{\min}@f$ (Arnold et al. 2019, from
   * memory) applied to the shifted operator, whose potential is ≥ 0:
   * @f$\lambda_k \approx (1 + d/4)(W_k + \sigma) - \sigma@f$, at most @p count.
   */
  std::vector<double> landscape_eigenvalue_estimates(unsigned int dimension,
                                                     const LandscapeField &field,
                                                     std::size_t count);

} // namespace alloyspec
