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
} // namespace alloyspec
