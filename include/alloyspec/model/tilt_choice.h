/** @file tilt_choice.h  Choosing the tilt θ by the cross-entropy method from a short pilot. */
#pragma once

#include <alloyspec/model/single_site_laws.h>
#include <alloyspec/model/tilt_profile.h>

#include <vector>

namespace alloyspec
{
  /** One pilot realisation, as the cross-entropy update needs it. */
  struct PilotSample
  {
    /**
     * @f$\bar q_\varphi = \sum_n \varphi_n q_n / \sum_n \varphi_n@f$ with the
     * relative tilts φ of the box (PotentialModel::profile_mean()): the mean
     * cell value when the tilt is flat (the law's units).
     */
    double mean_cell_value = 0;
    /** ln w of the realisation relative to the model law (PotentialModel::log_weight()). */
    double log_weight = 0;
  };

  /**
   * The cross-entropy update of an exponential tilt (de Boer, Kroese, Mannor &
   * Rubinstein, Ann. Oper. Res. 134 (2005) 19): among the tilts of the model
   * law p, the one closest in cross entropy to p conditioned on the elite
   * event maximises @f$\sum_{r\in\text{elite}} w_r \ln p_\theta(q_r)@f$. For
   * i.i.d. cells in a natural exponential family this is moment matching,
   * @f$\mathbb{E}_\theta[q] = \sum_r w_r \bar q_r / \sum_r w_r@f$, solved here
   * for θ by bisection (the tilted mean falls strictly with θ), within
   * |θ| ≤ @p max_abs_tilt and the tilts the law can represent. @p elite must
   * not be empty.
   *
   * With a shaped tilt (cell n drawn from @f$p_{\theta\varphi_n}@f$, @p profile
   * given), the same maximisation over θ: since
   * @f$\partial_\theta \ln p_{\theta\varphi}(q) = \varphi(\mathbb{E}_{\theta\varphi}[q] - q)@f$,
   * the optimum solves
   * @f$\sum_l c_l\varphi_l\,\mathbb{E}_{\theta\varphi_l}[q] / \sum_l c_l\varphi_l
   *    = \sum_r w_r \bar q_{\varphi,r} / \sum_r w_r@f$
   * over the levels l of the profile (c_l cells each), whose left side also
   * falls strictly with θ. A flat profile gives the rule above.
   */
  double cross_entropy_tilt(const SingleSiteLaw &law, const std::vector<PilotSample> &elite,
                            double max_abs_tilt, const TiltProfile *profile = nullptr);

  /** One pilot realisation of a study with tilt windows (TiltWindows). */
  struct WindowPilotSample
  {
    /**
     * For every window c: @f$S_c = \sum_j \varphi_j q_{c+j} / \sum_j \varphi_j@f$,
     * the mean of its cells weighted by the window's relative tilts
     * (PotentialModel::window_means()).
     */
    std::vector<double> window_means;
    /** ln w of the realisation relative to the model law. */
    double log_weight = 0;
  };

  /**
   * The cross-entropy update of θ for the defensive mixture of tilt windows,
   * @f$q_\theta = \alpha p + \frac{1-\alpha}{K}\sum_c p\prod_{j}
   * p_{\theta\varphi_j}(q_{c+j})/p(q_{c+j})@f$: θ maximising
   * @f$F(\theta) = \sum_r w_r \ln (q_\theta/p)(\mathbf q_r)@f$ over the elite.
   * With @f$\ell_{rc} = \theta\Phi S_{rc} + \sum_j \ln M(\theta\varphi_j)@f$,
   * @f$\Phi = \sum_j\varphi_j@f$, and the responsibilities
   * @f$\gamma_{rc} = \frac{1-\alpha}{K} e^{-\ell_{rc}} \big/ \big(\alpha +
   * \frac{1-\alpha}{K}\sum_{c'} e^{-\ell_{rc'}}\big)@f$, and since
   * @f$\partial_\theta \ln M(\theta\varphi) = -\varphi\,\mathbb{E}_{\theta\varphi}[q]@f$,
   * @f[ F'(\theta) = \Phi \sum_r w_r \sum_c \gamma_{rc}
   *     \big(g(\theta) - S_{rc}\big),\qquad
   *     g(\theta) = \frac1\Phi\sum_j \varphi_j \mathbb{E}_{\theta\varphi_j}[q], @f]
   * so F rises while @f$g(\theta)@f$ exceeds the responsibility-weighted
   * elite window mean @f$T(\theta) = \sum_r w_r\sum_c\gamma_{rc}S_{rc} /
   * \sum_r w_r\sum_c\gamma_{rc}@f$. Its stationary point (also the fixed point
   * of expectation–maximisation; Dempster, Laird & Rubin, J. R. Stat. Soc. B 39
   * (1977) 1, which converged too slowly here) is found by bracketing a sign
   * change of g − T, doubling θ away from 0 in the direction F rises, and
   * bisection. If F rises as far as the law can be tilted (or @p max_abs_tilt),
   * that limit is returned. @p start (the θ the elite was drawn at) is not
   * needed: the weights w_r already carry it. @p profile: the window's
   * relative tilts; @p untilted_share α.
   */
  double cross_entropy_window_tilt(const SingleSiteLaw &law,
                                   const std::vector<WindowPilotSample> &elite,
                                   const TiltProfile &profile, double untilted_share,
                                   double start, double max_abs_tilt);

  /**
   * The window edge for `sampling/tilt window = auto`: the smallest whole s
   * with @f$d\pi^2/(s a)^2 \le E - E_0@f$, i.e. an empty cube of s cells per
   * direction (edge s a, walls) whose lowest level lies at or below the target
   * E above the band bottom @f$E_0@f$: @f$s = \lceil \pi\sqrt{d/(E-E_0)}/a \rceil@f$.
   * A state at E − E₀ needs an empty region of about that size (its
   * de Broglie half-wavelength per direction), so a window of this edge can
   * hold the rare region behind N(E). @p excess = E − E₀ > 0 in solver units,
   * @p cell_size a, @p dimension d. Returns at least 1.
   */
  unsigned int window_for_energy(double excess, double cell_size, unsigned int dimension);
} // namespace alloyspec
