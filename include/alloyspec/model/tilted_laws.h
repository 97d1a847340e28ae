/** @file tilted_laws.h  Exponentially tilted single-site laws that have no closed form of their own. */
#pragma once

#include <alloyspec/model/single_site_laws.h>

#include <functional>
#include <string>
#include <vector>

namespace alloyspec
{
  /**
   * Uniform law on [a, b] tilted by θ: the truncated exponential density
   * @f$p_\theta(q) = \theta e^{-\theta (q-a)}/(1 - e^{-\theta\Delta})@f$,
   * @f$\Delta = b - a@f$, sampled by its exact quantile
   * @f$q = a - \ln(1 + u\,\mathrm{expm1}(-\theta\Delta))/\theta@f$ for θ > 0
   * and the mirrored form @f$q = b - \ln(1 + (1-u)\,\mathrm{expm1}(\theta\Delta))/\theta@f$
   * for θ < 0 (both non-decreasing in u). With @f$t = \theta\Delta@f$,
   * @f$\ln M(\theta) = -\theta a + \ln(-\mathrm{expm1}(-t)/t)@f$ (θ > 0) or
   * @f$-\theta b + \ln(\mathrm{expm1}(t)/t)@f$ (θ < 0), both free of
   * cancellation. Mean and variance from the truncated exponential law with
   * rate λ = |θ| on [0, Δ]: @f$\Delta/\mathrm{expm1}(\lambda\Delta)@f$ form,
   * and their Taylor series for |t| < 1e-3.
   */
  TiltedLaw make_tilted_uniform_law(double a, double b, double theta);

  /**
   * Any law given by its quantile function Q = F⁻¹, tilted by θ through its
   * own tilted quantile function, computed in the probability variable
   * s = F(q): the tilted distribution function is
   * @f$F_\theta(Q(s)) = G(s)/G(1)@f$ with @f$G(s) = \int_0^s g(t)\,dt@f$,
   * @f$g(t) = e^{-\theta (Q(t) - q_{\rm ref})}@f$ and @f$M(\theta) = e^{-\theta q_{\rm ref}} G(1)@f$
   * (q_ref the end of the support the tilt favours, so that g ≤ 1). G is
   * tabulated on nodes geometric towards both ends of (0, 1) (2^-200 … 1 − 2^-53;
   * a tilt that puts more than 1e-15 of the mass below 2^-200 is refused),
   * each interval
   * refined by 15-point Gauss–Kronrod (Boost.Math) until the Kronrod and
   * Gauss estimates agree to 1e-13 relative. A draw v maps to
   * @f$s = G^{-1}(v\,G(1))@f$ by safeguarded Newton steps within its table
   * interval, and then to q = Q(s); the quantile is therefore non-decreasing
   * in v. @p breakpoints are values of s where Q has a kink (added as nodes).
   * Used for the beta and tabulated laws. Throws InputError naming
   * `sampling/tilt` if G(1) underflows (tilt too strong for the law).
   */
  TiltedLaw make_tilted_law_by_quadrature(std::function<double(double)> quantile,
                                          double support_min, double support_max,
                                          double theta, const std::string &description,
                                          const std::vector<double> &breakpoints = {});

  /** @f$\ln(e^x + e^y)@f$ without overflow; −∞ arguments allowed. */
  double log_add_exp(double x, double y);
} // namespace alloyspec
