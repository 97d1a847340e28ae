/** @file exact_1d.h  Exact spectra of 1D cell potentials (verification reference). */
#pragma once

#include <alloyspec/model/weyl_law.h> // Boundary

#include <cstddef>
#include <vector>

namespace alloyspec
{
  /**
   * @f$H = -d^2/dx^2 + v@f$ on @f$[0, L a]@f$ with @f$v = v_n@f$ on cell n and
   * Dirichlet or Neumann conditions at both ends. On each cell the shooting
   * solution is elementary (sin/cos, sinh/cosh or linear), so the number of its
   * zeros is exact; Sturm oscillation (e.g. Coddington & Levinson, Theory of
   * Ordinary Differential Equations, 1955, ch. 8) turns it into
   * @f$\#\{\lambda_j < \lambda\}@f$:
   * - Dirichlet (u(0) = 0, u'(0) = 1): the zeros of u in (0, L a);
   * - Neumann (u(0) = 1, u'(0) = 0): those zeros plus one if u(La) u'(La) < 0.
   * Bisection on the count yields each eigenvalue to rounding.
   *
   * The library's own reference for `alloyspec verify`; the unit tests use an
   * independent implementation (tests/support/sturm_1d.h).
   */
  class Exact1dSpectrum
  {
  public:
    Exact1dSpectrum(std::vector<double> cell_values, double cell_size, Boundary bc);

    /** Number of eigenvalues strictly below @p lambda. */
    std::size_t count_below(double lambda) const;
    /** The lowest @p count eigenvalues, ascending, with multiplicity. */
    std::vector<double> lowest(std::size_t count) const;

  private:
    std::vector<double> v_;
    double              a_;
    Boundary            bc_;
  };
} // namespace alloyspec
