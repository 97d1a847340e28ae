/**
 * @file tilt_window.h  A defensive mixture of localised tilts: the tilt acts on
 * the cells of one window of the box, at a random position, or nowhere.
 */
#pragma once

#include <cstddef>
#include <cstdint>
#include <vector>

namespace alloyspec
{
  /**
   * The sampling law of `sampling/tilt window = ℓ`: a mixture of K + 1
   * components,
   * @f[ q(\mathbf q) = \alpha\, p(\mathbf q) + \frac{1-\alpha}{K}\sum_{c=1}^{K}
   *     p(\mathbf q)\prod_{n \in B_c}\frac{p_\theta(q_n)}{p(q_n)}, @f]
   * with p the model law of all cells, @f$p_\theta@f$ its exponential tilt, α
   * the untilted share (`sampling/untilted share`) and @f$B_c@f$ the c-th
   * window of @f$s_i = \min(\ell, L_i)@f$ cells in direction i that lies
   * inside the box: @f$K = \prod_i (L_i - s_i + 1)@f$ positions. Component c
   * tilts only the cells of @f$B_c@f$. (Windows stay inside the box: one that
   * wrapped across a Dirichlet face would tilt cells the wall separates.)
   *
   * The tail event of a large box is a local one (a region of low cells
   * somewhere), so a tilt of the whole box moves every cell while only a
   * region matters, and its likelihood ratio degenerates with the number of
   * cells. A window tilts only a region of the event's size, and the mixture
   * over its positions puts it wherever the event may be.
   *
   * The likelihood ratio is exact and bounded:
   * @f[ w = \frac{p}{q} = \Big(\alpha + \frac{1-\alpha}{K}\sum_c e^{-\ell_c}\Big)^{-1}
   *     \le \frac1\alpha,\qquad \ell_c = \sum_{n\in B_c} \ln\frac{p(q_n)}{p_\theta(q_n)}, @f]
   * so the estimator @f$\frac1R\sum_r w_r X_r@f$ is unbiased for any X
   * (@f$E_q[wX] = E_p[X]@f$) and its variance is at most @f$1/\alpha@f$ times
   * that of plain sampling (the defensive mixture of Hesterberg, Technometrics
   * 37 (1995) 185; Owen & Zhou, JASA 95 (2000) 135; the mixture weight is the
   * balance heuristic of Veach & Guibas, SIGGRAPH 1995).
   */
  class TiltWindows
  {
  public:
    /**
     * @p cells per direction (1 to 3 entries), window edge @p edge ≥ 1 in
     * cells, untilted share @p untilted_share in (0, 1).
     */
    TiltWindows(std::vector<unsigned int> cells, unsigned int edge, double untilted_share);

    /** K: the positions of a window inside the box. */
    std::size_t  count() const { return count_; }
    unsigned int edge() const { return edge_; }
    double       untilted_share() const { return alpha_; }

    /**
     * The component of a realisation from one uniform @p u in (0, 1): -1 for
     * the untilted one (u < α), else the window index c =
     * ⌊(u − α)/(1 − α)·K⌋.
     */
    long component(double u) const;

    /** Whether cell @p n lies in window @p c. */
    bool contains(std::size_t c, std::size_t n) const;

    /**
     * @f$\ln w@f$ from the per-cell log ratios @f$t_n = \ln p(q_n)/p_\theta(q_n)@f$:
     * @f$-\ln\big(\alpha + \frac{1-\alpha}{K}\sum_c e^{-\ell_c}\big)@f$ with
     * @f$\ell_c = \sum_{n\in B_c} t_n@f$, evaluated as a log-sum-exp so that
     * no term overflows. The window sums are separable: sums of @f$s_i@f$
     * consecutive cells along each direction in turn.
     */
    double log_weight(const std::vector<double> &t) const;

    /**
     * The global cell index of cell @p j of window @p c, with j numbered
     * inside the window (first direction fastest, @f$s_i@f$ cells per
     * direction): the window's corner plus j, direction by direction.
     */
    std::size_t cell(std::size_t c, std::size_t j) const;

    /**
     * The inverse of cell(): the index j inside window @p c of global cell
     * @p n, or window_size() when n lies outside the window.
     */
    std::size_t offset(std::size_t c, std::size_t n) const;

    /** Cells of one window: @f$\prod_i s_i@f$. */
    std::size_t window_size() const;

    /** Cells per direction of one window: @f$s_i = \min(\ell, L_i)@f$. */
    std::vector<unsigned int> window_extent() const;

    /**
     * @f$\ln w = -\ln\big(\alpha + \frac{1-\alpha}{K}\sum_c e^{-\ell_c}\big)@f$
     * from the K window log ratios @p ell (ℓ_c of the window's own tilts,
     * whatever their shape), as a log-sum-exp so that no term overflows.
     */
    double mixture_log_weight(const std::vector<double> &ell) const;

  private:
    std::vector<unsigned int> cells_;
    std::size_t               n_cells_ = 0;
    std::size_t               count_   = 0;
    unsigned int              edge_    = 1;
    unsigned int span(unsigned int l) const { return edge_ < l ? edge_ : l; }
    double                    alpha_   = 0.2;
  };
} // namespace alloyspec
