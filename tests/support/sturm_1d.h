/**
 * @file sturm_1d.h  Exact spectra of 1D cell potentials, as a reference for tests.
 *
 * The operator is @f$H = -\frac{d^2}{dx^2} + v(x)@f$ on @f$[0, L a]@f$ with
 * @f$v = v_n@f$ on the cell @f$[n a, (n+1) a]@f$, @f$n = 0, \dots, L-1@f$, and
 * Dirichlet or Neumann conditions at both ends. On each cell the solution of
 * @f$-u'' + v_n u = \lambda u@f$ is elementary, so the shooting solution is
 * known exactly cell by cell, and Sturm oscillation turns it into an exact
 * eigenvalue count; bisection on the count gives each eigenvalue to rounding
 * level, also for nearly degenerate pairs.
 *
 * Usage:
 * @code
 *   using namespace alloyspec;
 *   std::size_t n = testing::count_below(v, a, Boundary::dirichlet, lambda); // #{λ_j < λ}
 *   std::vector<double> low = testing::lowest_eigenvalues(v, a, Boundary::neumann, 10);
 * @endcode
 */
#pragma once

#include <alloyspec/model/weyl_law.h> // Boundary

#include <algorithm>
#include <cmath>
#include <cstddef>
#include <stdexcept>
#include <utility>
#include <vector>

namespace alloyspec::testing
{
  namespace sturm_detail
  {
    constexpr double pi = 3.14159265358979323846;

    /**
     * Prüfer state of the shooting solution: with @f$u = r \sin\Theta@f$,
     * @f$u' = r \cos\Theta@f$ the angle @f$\Theta = j\pi + \psi@f$ is continuous
     * and every zero of u is a crossing of a multiple of π from below (there
     * @f$\Theta' = 1 > 0@f$). We keep the integer j (= number of zeros of u in
     * (0, x]) exactly and the position inside the current half-turn as a unit
     * vector (s, c) = (sin ψ, cos ψ) with s ≥ 0 (s = 0 only with c = 1, i.e. at a
     * zero). Within a half-turn only the signs of u and u' matter for counting,
     * and those do not depend on how u' is scaled, so each cell may use its own
     * scaling of u' without disturbing j.
     */
    struct PruferState
    {
      std::size_t half_turns = 0;
      double      s          = 0.0;
      double      c          = 1.0;
    };

    /** Stores the direction of (u, u'), given with u ≥ 0. */
    inline void set_direction(PruferState &state, const double u, const double du)
    {
      const double r = std::hypot(u, du);
      state.s        = std::max(u, 0.0) / r;
      state.c        = du / r;
      if (state.s == 0.0)
        state.c = 1.0; // at a zero the solution is increasing in the half-turn frame
    }

    /**
     * Advances the state over one cell of width h with v − λ = @p v_minus_lambda.
     * Every branch decides the zero crossing and the new direction from the same
     * computed numbers, so the count stays consistent with the state it leaves.
     */
    inline void advance(PruferState &state, const double v_minus_lambda, const double h)
    {
      if (v_minus_lambda < 0.0)
        {
          // Oscillatory: in the scaled angle φ with u ∝ sin φ, u'/k ∝ cos φ the
          // solution is r sin(φ0 + k t), so φ advances by exactly k h; the zeros
          // are the multiples of π in (φ0, φ0 + k h].
          const double k       = std::sqrt(-v_minus_lambda);
          const double phi0    = std::atan2(k * state.s, state.c); // ∈ [0, π)
          const double phi1    = phi0 + k * h;
          double       crossed = std::floor(phi1 / pi);
          double       psi     = phi1 - crossed * pi;
          // Keep ψ in [0, π) despite the rounding of phi1/π, so that no zero is
          // lost or counted twice.
          if (psi >= pi)
            {
              psi -= pi;
              crossed += 1.0;
            }
          psi = std::max(psi, 0.0);
          state.half_turns += static_cast<std::size_t>(crossed);
          set_direction(state, std::sin(psi), k * std::cos(psi));
        }
      else if (v_minus_lambda > 0.0)
        {
          // Evanescent: with w = u'/κ, (u, w)' = κ (w, u), so p = w + u grows like
          // e^{κt} and m = w − u decays like e^{−κt}. u can vanish at most once in
          // the cell (Θ can only cross a multiple of π upwards), and it does iff u
          // at the end of the cell has changed sign. The common factor e^{κh}/2 is
          // dropped: u(h) ∝ (w0 + u0) − (w0 − u0) e^{−2κh}, written with expm1 so
          // that a solution starting at a zero (u0 = 0) stays positive even when
          // κh is tiny. Clamping the exponent only avoids 0/0 on absurdly wide cells.
          const double kappa = std::sqrt(v_minus_lambda);
          const double r     = std::hypot(kappa * state.s, state.c);
          const double u0    = kappa * state.s / r;
          const double w0    = state.c / r;
          const double em1   = std::expm1(-std::min(2.0 * kappa * h, 600.0)); // e^{−2κh} − 1
          const double u1    = 2.0 * u0 - (w0 - u0) * em1;
          const double w1    = 2.0 * w0 + (w0 - u0) * em1;
          if (u1 > 0.0)
            set_direction(state, u1, kappa * w1);
          else
            {
              ++state.half_turns;
              set_direction(state, -u1, -kappa * w1);
            }
        }
      else
        {
          // λ = v: u is linear, u(h) = u0 + u0' h.
          const double u1 = state.s + state.c * h;
          if (u1 > 0.0 || state.s == 0.0)
            set_direction(state, std::max(u1, 0.0), state.c);
          else
            {
              ++state.half_turns;
              set_direction(state, -u1, -state.c);
            }
        }
    }

    inline void check_arguments(const std::vector<double> &v, const double a, const Boundary bc)
    {
      if (v.empty())
        throw std::invalid_argument("sturm_1d: need at least one cell");
      if (!(a > 0.0))
        throw std::invalid_argument("sturm_1d: cell size must be positive");
      if (bc == Boundary::periodic)
        throw std::invalid_argument("sturm_1d: only Dirichlet and Neumann ends are supported");
    }
  } // namespace sturm_detail

  /**
   * Number of eigenvalues strictly below @p lambda of @f$-u'' + v u@f$ on
   * @f$[0, La]@f$ (L = v.size(), cell size @p a) with Dirichlet or Neumann ends.
   *
   * Sturm oscillation in Prüfer form: the shooting solution from the left end
   * has angle @f$\Theta(x;\lambda)@f$, increasing in λ, starting at
   * @f$\Theta(0) = 0@f$ (Dirichlet, u(0)=0, u'(0)=1) or π/2 (Neumann, u(0)=1,
   * u'(0)=0). λ is an eigenvalue iff @f$\Theta(La) = k\pi@f$, k ≥ 1 (Dirichlet), or
   * @f$\Theta(La) = \pi/2 + k\pi@f$, k ≥ 0 (Neumann). Hence, with j the number of
   * zeros of u in (0, La]:
   *  - Dirichlet: count = j, minus one if u(La) = 0 (= zeros in the open interval);
   *  - Neumann: count = j + [u(La) u'(La) < 0].
   * The Neumann rule "zeros in (0, La) + [u u' < 0]" undercounts by one when
   * u(La) = 0 exactly; counting the zeros in (0, La] fixes that case.
   */
  inline std::size_t count_below(const std::vector<double> &v, const double a, const Boundary bc,
                                 const double lambda)
  {
    sturm_detail::check_arguments(v, a, bc);
    sturm_detail::PruferState state;
    if (bc == Boundary::neumann)
      {
        state.s = 1.0;
        state.c = 0.0;
      }
    for (const double value : v)
      sturm_detail::advance(state, value - lambda, a);

    if (bc == Boundary::dirichlet)
      return state.half_turns - (state.s == 0.0 && state.half_turns > 0 ? 1 : 0);
    return state.half_turns + (state.c < 0.0 && state.s > 0.0 ? 1 : 0);
  }

  /**
   * The lowest @p count eigenvalues (ascending, 0-based λ_0 < λ_1 < …; 1D
   * eigenvalues are simple), each bisected on count_below() until the bracket
   * cannot shrink further in double precision (or to 1e-300 absolute width).
   *
   * Bracket: @f$\min v \le \lambda_i \le \max v + \pi^2 (i+1)^2/(La)^2@f$ by
   * comparison with the constant potentials min v and max v.
   */
  inline std::vector<double> lowest_eigenvalues(const std::vector<double> &v, const double a,
                                                const Boundary bc, const std::size_t count)
  {
    sturm_detail::check_arguments(v, a, bc);
    const auto [v_min, v_max] = std::minmax_element(v.begin(), v.end());
    const double length       = a * double(v.size());

    std::vector<double> eigenvalues;
    eigenvalues.reserve(count);
    for (std::size_t i = 0; i < count; ++i)
      {
        double lo = (i == 0) ? *v_min : eigenvalues.back(); // count_below(lo) ≤ i
        double hi = *v_max + sturm_detail::pi * sturm_detail::pi * double(i + 1) * double(i + 1) /
                               (length * length);
        // The bound can be attained (constant potential), and count_below is strict.
        hi += 1e-3 * (std::abs(hi) + 1.0);
        while (count_below(v, a, bc, hi) <= i)
          hi += 2.0 * (std::abs(hi) + 1.0);

        for (int iteration = 0; iteration < 2000; ++iteration)
          {
            const double mid = 0.5 * (lo + hi);
            if (!(mid > lo && mid < hi) || hi - lo < 1e-300)
              break;
            if (count_below(v, a, bc, mid) > i)
              hi = mid;
            else
              lo = mid;
          }
        eigenvalues.push_back(0.5 * (lo + hi));
      }
    return eigenvalues;
  }
} // namespace alloyspec::testing
