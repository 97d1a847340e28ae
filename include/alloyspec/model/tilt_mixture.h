/** @file tilt_mixture.h  The balance heuristic: one weight for realisations drawn at several tilts. */
#pragma once

#include <vector>

namespace alloyspec
{
  /**
   * Log of the balance-heuristic weight of a realisation q when n_k of the n
   * realisations were drawn from p_θk (multiple importance sampling; Veach &
   * Guibas, SIGGRAPH 1995; Owen & Zhou, JASA 95 (2000) 135):
   * @f[ w(q) = \frac{p(q)}{\sum_k c_k\, p_{\theta_k}(q)}
   *          = \Big(\sum_k c_k\, e^{-\ell_k(q)}\Big)^{-1},\qquad
   *    \ell_k(q) = \log\frac{p(q)}{p_{\theta_k}(q)},\; c_k = n_k/n, @f]
   * whatever tilt q was drawn at. Then @f$\frac1n\sum_k\sum_{r\in k} w(q_r) N(q_r)@f$
   * is unbiased for E_p[N]: @f$\sum_k n_k E_{\theta_k}[wN] = n \int N\,p\,
   * \frac{\sum_k c_k p_{\theta_k}}{\sum_j c_j p_{\theta_j}} = n E_p[N]@f$.
   * Computed as −logsumexp_k(log c_k − ℓ_k), so no term overflows.
   * @p log_weights holds ℓ_k (0 for θ_k = 0), @p shares the c_k (positive, summing to 1).
   */
  double balance_log_weight(const std::vector<double> &log_weights,
                            const std::vector<double> &shares);
} // namespace alloyspec
