/** @file eigen_enclosure.h  Guaranteed intervals for the lowest eigenvalues from a Ritz block (Lehmann's bounds). */
#pragma once

#include <vector>

namespace alloyspec
{
  /** What the bounds are computed from: j Ritz pairs of the pencil (K, M), ascending. */
  struct EnclosureInput
  {
    /** Ritz values θ_1 ≤ … ≤ θ_j of an M-orthonormal block X with Xᵀ R = 0. */
    std::vector<double> theta;
    /** j × j column-major @f$R^T R@f$, R = KX − MXΘ (Euclidean inner products). */
    std::vector<double> residual_gram;
    /** μ_M > 0 with @f$x^T M x \ge \mu_M\,x^T x@f$ for every admissible x (so @f$M^{-1} \preceq I/\mu_M@f$ there). */
    double              mass_floor = 0;
    /** ν with θ_j < ν ≤ λ_{j+1}: the assumption the lower bounds rest on (see enclose()). */
    double              nu = 0;
    /** Every eigenvalue is ≥ this (min of the potential). */
    double              spectrum_floor = 0;
    /** Per pair: widening for rounding in the computed Ritz values and residuals (≥ 0). */
    std::vector<double> allowance;
  };

  /** @f$[\ell_i, u_i] \ni \lambda_i@f$ for i = 1..j. */
  struct Enclosures
  {
    std::vector<double> lower, upper;
  };

  /**
   * Upper bounds: @f$\lambda_i \le \theta_i@f$ (Rayleigh–Ritz: the i-th Ritz
   * value of any subspace bounds λ_i from above, Courant–Fischer).
   *
   * Lower bounds (Lehmann 1949; in the form derived here): with
   * S = K − νM and u ∈ span X, the quotient
   * @f$f(u) = u^T S u / u^T S M^{-1} S u@f$ is a Rayleigh quotient of the
   * operator with eigenvalues @f$\tau_k = 1/(\lambda_k - \nu)@f$ (expand u in
   * M-orthonormal eigenvectors, z_k = (λ_k − ν) c_k). If λ_{j+1} ≥ ν, exactly
   * λ_1..λ_j give negative τ, and the most negative are those nearest below ν.
   * Courant–Fischer on span X gives @f$\mu_l \ge \tau_{(l)} =
   * 1/(\lambda_{j+1-l} - \nu)@f$ for the ascending eigenvalues μ_l of
   * @f$A_0 y = \mu A_1 y@f$, @f$A_0 = X^T S X = \Theta - \nu I@f$,
   * @f$A_1 = X^T S M^{-1} S X = R^T M^{-1} R + (\Theta - \nu I)^2@f$ (the
   * cross terms vanish by Xᵀ R = 0 and XᵀMX = I). Both sides negative, so
   * @f$\lambda_{j+1-l} \ge \nu + 1/\mu_l@f$. Replacing @f$R^T M^{-1} R@f$ by
   * the larger @f$R^T R/\mu_M@f$ only raises μ_l, so the bound stays valid.
   * For one isolated pair it reduces to Temple's inequality
   * @f$\lambda \ge \theta - \rho^2/(\nu - \theta)@f$; for a cluster it uses
   * the whole block's residuals at once.
   *
   * **Assumption:** λ_{j+1} ≥ ν, i.e. the pencil has at most j eigenvalues
   * below ν — no eigenvalue was missed below the cut. An inertia count at ν
   * checks exactly this; without one, the bounds are conditional on it.
   * Each bound is widened by its allowance and the lower one is at least
   * spectrum_floor.
   */
  Enclosures enclose(const EnclosureInput &input);
} // namespace alloyspec
