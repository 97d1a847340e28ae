/** @file single_site_laws.h  Laws of one cell value q_n, sampled by inversion, and the special functions they need. */
#pragma once

#include <memory>
#include <string>
#include <vector>

namespace alloyspec
{
  struct TiltedLaw;

  /**
   * The law of one cell value @f$q_n@f$, sampled by inversion: sample(u) is the
   * quantile function @f$F^{-1}(u) = \inf\{q : F(q) \ge u\}@f$ for
   * @f$u \in (0,1)@f$. Every implementation is non-decreasing in u, so the
   * same uniform gives the same rank under every law (a monotone coupling).
   */
  class SingleSiteLaw
  {
  public:
    virtual ~SingleSiteLaw() = default;
    virtual double      quantile(double u) const = 0;
    /** Exact @f$\mathbb{E}[q]@f$. */
    virtual double      mean() const = 0;
    /** Exact @f$\mathbb{E}[(q - \mathbb{E}q)^2]@f$. */
    virtual double      variance() const = 0;
    /**
     * Infimum of the support (the bottom of the almost-sure spectrum); -∞ for
     * the untruncated Gaussian law.
     */
    virtual double      support_min() const = 0;
    /** Supremum of the support; +∞ for the untruncated Gaussian law. */
    virtual double      support_max() const = 0;
    virtual std::string description() const = 0;

    /**
     * The exponentially tilted law @f$p_\theta(q) = e^{-\theta q} p(q)/M(\theta)@f$,
     * @f$M(\theta) = \mathbb{E}_p[e^{-\theta q}]@f$, with @f$\ln M(\theta)@f$,
     * so that one draw q from it carries the log-likelihood ratio
     * @f$\ln\frac{p(q)}{p_\theta(q)} = \theta q + \ln M(\theta)@f$
     * (tilted_laws.h). θ > 0 favours low values. θ = 0 returns a copy with
     * @f$\ln M = 0@f$ exactly. Throws InputError naming `sampling/tilt` when
     * the tilt is too strong for the law to be represented in double
     * precision.
     */
    virtual TiltedLaw tilted(double theta) const = 0;
  };

  /** A law tilted by θ (SingleSiteLaw::tilted()) and @f$\ln M(\theta)@f$. */
  struct TiltedLaw
  {
    std::unique_ptr<SingleSiteLaw> law;
    double                         theta      = 0;
    double                         log_moment = 0;
  };

  // The factories throw InputError, naming the matching `potential/...`
  // parameter and the allowed range, for arguments outside that range.

  /** Uniform on [a, b], a < b. */
  std::unique_ptr<SingleSiteLaw> make_uniform_law(double a, double b);
  /** Binary alloy: q_A with probability c, q_B otherwise (0 ≤ c ≤ 1). */
  std::unique_ptr<SingleSiteLaw> make_bernoulli_law(double c, double q_a, double q_b);
  /** Finite law: values[i] with probabilities[i] (1..64 of them; non-negative, summing to 1 within 1e-9, renormalised). */
  std::unique_ptr<SingleSiteLaw> make_discrete_law(const std::vector<double> &values,
                                                   const std::vector<double> &probabilities);

  /**
   * Normal law @f$\mathcal{N}(\mu, \sigma^2)@f$, σ > 0:
   * @f$q = \mu + \sigma\,\Phi^{-1}(u)@f$. Its support is the whole real line,
   * so support_min() = -∞ and support_max() = +∞.
   */
  std::unique_ptr<SingleSiteLaw> make_gaussian_law(double mean, double standard_deviation);

  /**
   * Normal law @f$\mathcal{N}(\mu, \sigma^2)@f$ conditioned on [a, b]: with
   * @f$\alpha = (a-\mu)/\sigma@f$, @f$\beta = (b-\mu)/\sigma@f$ and
   * @f$Z = \Phi(\beta) - \Phi(\alpha)@f$,
   * @f$q = \mu + \sigma\,\Phi^{-1}\bigl(\Phi(\alpha) + u Z\bigr)@f$ (evaluated in
   * the mirrored form when the interval lies mostly above μ, so that the
   * tails keep their relative precision). Mean and variance (Johnson, Kotz &
   * Balakrishnan, Continuous Univariate Distributions vol. 1, 2nd ed., 1994,
   * ch. 13 §10.1):
   * @f$\mathbb{E}q = \mu + \sigma\,\frac{\varphi(\alpha)-\varphi(\beta)}{Z}@f$,
   * @f$\operatorname{Var}q = \sigma^2\Bigl[1 + \frac{\alpha\varphi(\alpha)-\beta\varphi(\beta)}{Z}
   *   - \Bigl(\frac{\varphi(\alpha)-\varphi(\beta)}{Z}\Bigr)^2\Bigr]@f$.
   * Requires a < b and that [a, b] meets @f$[\mu - 8\sigma, \mu + 8\sigma]@f$:
   * farther out the conditioned law is an exponential law at the end point
   * to all digits, and the variance formula loses its precision to
   * cancellation. One end may be put far away (say 40 σ) for a one-sided cut.
   */
  std::unique_ptr<SingleSiteLaw> make_truncated_gaussian_law(double mean,
                                                             double standard_deviation,
                                                             double a, double b);

  /**
   * Beta law with shapes α, β scaled to [a, b]: @f$q = a + (b-a)X@f$ with
   * density of X @f$x^{\alpha-1}(1-x)^{\beta-1}/B(\alpha,\beta)@f$ on (0, 1).
   * α sets the behaviour at a (density ∝ (q − a)^{α−1}), β that at b.
   * Quantile by inversion of the regularised incomplete beta function
   * (beta_quantile()). @f$\mathbb{E}q = a + (b-a)\frac{\alpha}{\alpha+\beta}@f$,
   * @f$\operatorname{Var}q = (b-a)^2\frac{\alpha\beta}{(\alpha+\beta)^2(\alpha+\beta+1)}@f$.
   * Requires α, β in [0.1, 1000] and a < b.
   */
  std::unique_ptr<SingleSiteLaw> make_beta_law(double alpha, double beta, double a, double b);

  /**
   * Law with the piecewise-linear density through the points
   * @f$(q_i, h_i)@f$, zero outside @f$[q_0, q_{N-1}]@f$, normalised here to
   * integral 1. Mean and variance are exact (Simpson's rule integrates the
   * at most cubic integrands on each piece exactly); the quantile inverts the
   * piecewise-quadratic distribution function exactly. Requires at least 2
   * points, strictly increasing finite q, finite h ≥ 0 and a positive
   * integral; @p source names the data in messages and the description.
   */
  std::unique_ptr<SingleSiteLaw> make_tabulated_law(const std::vector<double> &q,
                                                    const std::vector<double> &h,
                                                    const std::string         &source);

  /**
   * Reads a density file: one point "q h(q)" per line, q strictly
   * increasing; blank lines and text after '#' are ignored. Throws InputError
   * naming the file and line for a malformed line, a non-finite number, a
   * negative density or a q not greater than the previous one, and naming
   * the file for fewer than 2 points or a zero integral.
   */
  std::unique_ptr<SingleSiteLaw> read_tabulated_law(const std::string &path);

  /**
   * Coarse-grained binary alloy @f$A_x B_{1-x}@f$: each cell holds n atoms,
   * each independently of species A with probability x, and the cell value
   * follows the local composition K/n, @f$K \sim \mathrm{Binomial}(n, x)@f$:
   * @f$q = q_B + (q_A - q_B) K/n@f$. @f$\mathbb{E}q = q_B + (q_A - q_B)x@f$,
   * @f$\operatorname{Var}q = (q_A - q_B)^2 x(1-x)/n@f$. The quantile inverts a
   * table of the binomial distribution function (exact up to rounding).
   * Requires 1 ≤ n ≤ 10^6 and 0 ≤ x ≤ 1. n = 1 is the Bernoulli law.
   */
  std::unique_ptr<SingleSiteLaw> make_binomial_alloy_law(unsigned int n_atoms, double x,
                                                         double q_a, double q_b);

  /** Largest number of atoms per cell of make_binomial_alloy_law(). */
  constexpr unsigned int max_atoms_per_cell = 1000000;
  /** Range of the beta shapes accepted by make_beta_law(). */
  constexpr double min_beta_shape = 0.1, max_beta_shape = 1000.0;
  /** Truncated Gaussian: [a, b] must meet [μ − kσ, μ + kσ] for this k. */
  constexpr double max_truncation_distance = 8.0;

  /** Standard normal distribution function @f$\Phi(x) = \tfrac12\operatorname{erfc}(-x/\sqrt2)@f$. */
  double standard_normal_cdf(double x);

  /**
   * @f$\Phi^{-1}(u)@f$ for u in (0, 1), −∞ at 0, +∞ at 1, NaN outside [0, 1]:
   * Boost.Math's normal quantile (@f$-\sqrt2\,\operatorname{erfc}^{-1}(2u)@f$),
   * evaluated for u ≤ 1/2 and mirrored (@f$\Phi^{-1}(u) = -\Phi^{-1}(1-u)@f$;
   * 1 − u is exact there) so the upper tail is as accurate as the lower one.
   */
  double standard_normal_quantile(double u);

  /**
   * Regularised incomplete beta function
   * @f$I_x(a,b) = \frac{1}{B(a,b)}\int_0^x t^{a-1}(1-t)^{b-1}\,dt@f$
   * (DLMF §8.17.2), from Boost.Math (`boost::math::ibeta`); 0 for x ≤ 0 and 1
   * for x ≥ 1.
   */
  double incomplete_beta_ratio(double a, double b, double x);

  /**
   * x in [0, 1] with @f$I_x(a,b) = u@f$, from Boost.Math
   * (`boost::math::ibeta_inv`, checked by `ibeta` and replaced by bisection
   * on ln x where Boost 1.74 fails); 0 for u ≤ 0 and 1 for u ≥ 1. For
   * u > 1/2 it solves the mirrored problem
   * @f$1 - x = \text{beta\_quantile}(b, a, 1-u)@f$.
   */
  double beta_quantile(double a, double b, double u);
} // namespace alloyspec
