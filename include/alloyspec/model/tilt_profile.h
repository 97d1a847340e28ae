/**
 * @file tilt_profile.h  How strongly each cell of a tilted region is tilted:
 * evenly, or following the lowest mode of the empty region.
 */
#pragma once

#include <cstddef>
#include <string>
#include <vector>

namespace alloyspec
{
  /** `sampling/tilt shape`. */
  enum class TiltShape
  {
    /** Every tilted cell is tilted by the same θ. */
    flat,
    /**
     * Cell j of the tilted region is tilted by θ φ_j, with φ the cell masses
     * of the lowest mode of the empty region with walls (TiltProfile).
     */
    lowest_mode
  };

  /** "flat", "lowest mode" */
  std::string tilt_shape_name(TiltShape shape);

  /**
   * The relative tilt @f$\varphi_j \in (0, 1]@f$ of the cells of a tilted
   * region of @f$s_1\times\dots\times s_d@f$ cells (a window, or the whole
   * box), j numbered lexicographically, first direction fastest (as
   * Lattice::cell_index).
   *
   * For TiltShape::lowest_mode,
   * @f[ \varphi_j = \prod_i \frac{m_{s_i}(j_i)}{\max_k m_{s_i}(k)},\qquad
   *     m_s(k) = \int_k^{k+1}\sin^2\frac{\pi x}{s}\,dx
   *            = \frac12 - \frac{s}{4\pi}\Big(\sin\frac{2\pi(k+1)}{s} - \sin\frac{2\pi k}{s}\Big), @f]
   * the cell masses of the lowest Dirichlet eigenfunction
   * @f$\prod_i \sin(\pi x_i/s_i)@f$ of the empty region, scaled to 1 in the
   * central cell(s). Why this shape: to first order in the potential, the
   * lowest eigenvalue of the region is
   * @f$\lambda \approx \lambda_0 + \sum_j q_j \int_{\text{cell } j}\psi_0^2@f$
   * (Rayleigh–Schrödinger perturbation theory, e.g. Reed & Simon IV, §XII.1),
   * a sum of independent terms with weights ∝ φ_j. For the rare event that
   * such a sum is small, the exponential change of measure of each term in
   * proportion to its weight, @f$p_j(q) \propto e^{-\theta\varphi_j q}p(q)@f$,
   * is the efficient one (the Cramér tilt of a weighted sum; Sadowsky &
   * Bucklew, IEEE Trans. Inf. Theory 36 (1990) 579; Bucklew, Introduction to
   * Rare Event Simulation, Springer 2004, ch. 5). Cells near the walls, which
   * barely move the lowest eigenvalue, are left almost untilted, so their
   * share of the likelihood ratio's variance is small. Whatever the shape, the
   * weights stay exact: the shape changes the variance, never the mean.
   *
   * For TiltShape::flat, φ_j = 1.
   *
   * The values are grouped into levels: cells whose folded positions
   * @f$\min(j_i, s_i - 1 - j_i)@f$ form the same multiset (with the same
   * extents) share one level and exactly one value, so a law is tilted once
   * per level, not once per cell.
   */
  class TiltProfile
  {
  public:
    /** @p extent: cells per direction of the tilted region (1 to 3 entries, each ≥ 1). */
    TiltProfile(std::vector<unsigned int> extent, TiltShape shape);

    TiltShape                        shape() const { return shape_; }
    const std::vector<unsigned int> &extent() const { return extent_; }
    /** Cells of the region: @f$\prod_i s_i@f$. */
    std::size_t                      size() const { return level_of_.size(); }
    /** The distinct values of φ, one per level. */
    const std::vector<double>       &levels() const { return levels_; }
    /** How many cells of the region are at each level. */
    const std::vector<std::size_t>  &multiplicities() const { return multiplicity_; }
    /** The level of region cell @p j. */
    std::size_t                      level(std::size_t j) const { return level_of_[j]; }
    /** φ_j. */
    double                           value(std::size_t j) const { return levels_[level_of_[j]]; }

  private:
    std::vector<unsigned int> extent_;
    TiltShape                 shape_;
    std::vector<double>       levels_;
    std::vector<std::size_t>  multiplicity_;
    std::vector<std::size_t>  level_of_;
  };
} // namespace alloyspec
