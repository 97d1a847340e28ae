/** @file weyl_law.h  Closed-form counts for the free box and Weyl-type asymptotics. */
#pragma once

#include <alloyspec/model/boundary.h>

#include <cstdint>
#include <vector>

namespace alloyspec
{
  /**
   * Exact eigenvalues of -Δ on the box with edge lengths @p extents
   * (dimension = extents.size(), 1..3): @f$\pi^2 \sum_i n_i^2/\ell_i^2@f$ with
   * n_i ≥ 1 (Dirichlet) or n_i ≥ 0 (Neumann); periodic: @f$4\pi^2\sum_i m_i^2/\ell_i^2@f$,
   * m_i ∈ ℤ. Returns the lowest @p count values, sorted, with multiplicity.
   */
  std::vector<double> free_box_eigenvalues(const std::vector<double> &extents, Boundary bc,
                                           std::size_t count);

  /** Number of free-box eigenvalues ≤ E (exact lattice-point count); 0 for E < 0. */
  std::uint64_t free_box_count(const std::vector<double> &extents, Boundary bc, double energy);

  /**
   * Weyl expansion of the free-box count with boundary terms. In 3D, for volume
   * V, surface S and total edge length ℓ:
   * @f$N(E) \approx V E^{3/2}/(6\pi^2) \mp S E/(16\pi) + \ell E^{1/2}/(16\pi)@f$
   * (− Dirichlet, + Neumann); in 2D (area A, perimeter P):
   * @f$A E/(4\pi) \mp P E^{1/2}/(4\pi) + 1/4@f$; in 1D: @f$\ell E^{1/2}/\pi \mp 1/2@f$.
   * Periodic: the leading term only. An asymptotic expansion for large E;
   * returns 0 for E < 0.
   */
  double weyl_count(const std::vector<double> &extents, Boundary bc, double energy);

  /**
   * Leading Weyl term per unit volume for -Δ + q: @f$\omega_d (E-q)_+^{d/2}/(2\pi)^d@f$,
   * i.e. @f$(E-q)_+^{3/2}/(6\pi^2)@f$ in 3D, @f$(E-q)_+/(4\pi)@f$ in 2D,
   * @f$(E-q)_+^{1/2}/\pi@f$ in 1D.
   */
  double free_ids_density(unsigned int dimension, double energy_minus_q);

  /**
   * Semiclassical (phase-space) count per unit volume for a cell potential:
   * @f$N_{sc}(E) = \frac{1}{n} \sum_n \text{free\_ids\_density}(d, E - q_n)@f$.
   */
  double semiclassical_ids(unsigned int dimension, const std::vector<double> &cell_values,
                           double energy);
} // namespace alloyspec
