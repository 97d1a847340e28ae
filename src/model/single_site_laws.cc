/** @file single_site_laws.cc  Laws of one cell value; their special functions come from Boost.Math. */
#include <alloyspec/core/text_input.h>
#include <alloyspec/core/format.h>
#include <alloyspec/core/errors.h>
#include <alloyspec/model/single_site_laws.h>
#include <alloyspec/model/tilted_laws.h>

#include <boost/math/distributions/normal.hpp>
#include <boost/math/special_functions/beta.hpp>

#include <algorithm>
#include <cmath>
#include <cstdlib>
#include <fstream>
#include <limits>
#include <sstream>
#include <stdexcept>
#include <utility>

namespace alloyspec
{
  namespace
  {
    constexpr unsigned int max_discrete_values = 64;
    /**
     * Tolerance on the sum of the probabilities: loose enough for values typed
     * with nine decimals (0.333333333 three times), tight enough to catch a
     * forgotten entry.
     */
    constexpr double probability_sum_tolerance = 1e-9;
    constexpr double infinity                  = std::numeric_limits<double>::infinity();
    constexpr double pi                        = 3.141592653589793238462643383279502884;

    /** Numbers in messages: enough digits to tell 1 from 1.0000001. */
    std::string fmt(const double x) { return short_number(x, 12); }

    void require_finite(const double x, const std::string &name)
    {
      if (!std::isfinite(x))
        throw InputError(name + " = " + fmt(x) + " is not allowed, it must be a finite number");
    }

    /** θ = 0: the law itself, with ln M = 0 exactly (so log w = 0 exactly). */
    template <class Law>
    TiltedLaw untilted_copy(const Law &law)
    {
      TiltedLaw result;
      result.law = std::make_unique<Law>(law);
      return result;
    }

    /** Parses a whole token as a double; false if anything is left over. */
    bool parse_double(const std::string &token, double &value)
    {
      if (token.empty())
        return false;
      char *end = nullptr;
      value     = std::strtod(token.c_str(), &end);
      return end == token.c_str() + token.size();
    }


    // ------------------------------------------------------------ special functions

    /**
     * Boost.Math evaluates in double here rather than in long double (its
     * default for double arguments): the beta-law sampling test took 5.4 s of
     * CPU with long double and 1.05 s with double (measured), and double keeps
     * the accuracy the tests ask for (tests/unit/model/test_special_functions.cc).
     */
    using DoublePolicy =
      boost::math::policies::policy<boost::math::policies::promote_double<false>>;

    /**
     * x in (0, 1) with I_x(a, b) = p for p in (0, 1/2]. Boost.Math's ibeta_inv
     * is taken when I_x reproduces p to 1e-10 relative. Boost 1.74 does not
     * always deliver (measured: for a = 1/2 with b = 2 or 3 it gives up below
     * p ≈ 1e-5), so otherwise x is found by bisection on t = ln x with Boost's
     * ibeta: I is increasing in t, so the bracket [ln of the smallest positive
     * double, 0] always holds the root, and 64 halvings of its width 745 leave
     * less than 1e-16, a relative error in x at the level of rounding.
     */
    double lower_beta_quantile(const double a, const double b, const double p)
    {
      constexpr double accept_relative = 1e-10;
      try
        {
          const double x = boost::math::ibeta_inv(a, b, p, DoublePolicy());
          if (x > 0.0 && x < 1.0 &&
              std::abs(boost::math::ibeta(a, b, x, DoublePolicy()) - p) <= accept_relative * p)
            return x;
        }
      catch (const std::exception &)
        {
          // Boost gave up (evaluation or domain error inside its iteration).
        }
      double low = std::log(std::numeric_limits<double>::denorm_min()), high = 0.0;
      for (int i = 0; i < 64; ++i)
        {
          const double middle = 0.5 * (low + high);
          if (middle == low || middle == high)
            break;
          if (boost::math::ibeta(a, b, std::exp(middle), DoublePolicy()) < p)
            low = middle;
          else
            high = middle;
        }
      return std::exp(0.5 * (low + high));
    }

    /** Standard normal density. */
    double normal_density(const double x)
    {
      return std::exp(-0.5 * x * x) / std::sqrt(2.0 * pi);
    }

    // --------------------------------------------------------------------- laws

    /** Uniform law on [a, b]. */
    class UniformLaw : public SingleSiteLaw
    {
    public:
      UniformLaw(const double a, const double b)
        : a_(a)
        , b_(b)
      {}
      double quantile(const double u) const override { return a_ + u * (b_ - a_); }
      double mean() const override { return 0.5 * (a_ + b_); }
      double variance() const override { return (b_ - a_) * (b_ - a_) / 12.0; }
      double support_min() const override { return a_; }
      double support_max() const override { return b_; }
      std::string description() const override
      {
        return "uniform on [" + fmt(a_) + ", " + fmt(b_) + "]";
      }
      TiltedLaw tilted(const double theta) const override
      {
        return make_tilted_uniform_law(a_, b_, theta);
      }

    private:
      double a_, b_;
    };


    /**
     * A law with finitely many values. Values are kept sorted so that
     * quantile() is the true (non-decreasing) inverse distribution function:
     * then the same uniform u gives the same rank under every law, which makes
     * realisations of different laws comparable (a monotone coupling).
     */
    class DiscreteLaw : public SingleSiteLaw
    {
    public:
      DiscreteLaw(std::vector<std::pair<double, double>> value_probability,
                  std::string                            description)
        : description_(std::move(description))
      {
        std::sort(value_probability.begin(), value_probability.end());
        double sum = 0;
        for (const auto &vp : value_probability)
          sum += vp.second;
        double cumulative = 0;
        for (const auto &vp : value_probability)
          {
            const double p = vp.second / sum;
            values_.push_back(vp.first);
            probabilities_.push_back(p);
            cumulative += p;
            cumulative_.push_back(cumulative);
          }
        // Exactly 1 so that every u < 1 finds an entry despite rounding.
        cumulative_.back() = 1.0;

        mean_ = 0;
        for (std::size_t i = 0; i < values_.size(); ++i)
          mean_ += probabilities_[i] * values_[i];
        // Two-pass formula: no cancellation when the mean is large.
        variance_ = 0;
        for (std::size_t i = 0; i < values_.size(); ++i)
          variance_ += probabilities_[i] * (values_[i] - mean_) * (values_[i] - mean_);

        // Values of probability zero are not in the support.
        support_min_ = support_max_ = mean_;
        bool first = true;
        for (std::size_t i = 0; i < values_.size(); ++i)
          if (probabilities_[i] > 0)
            {
              support_min_ = first ? values_[i] : std::min(support_min_, values_[i]);
              support_max_ = first ? values_[i] : std::max(support_max_, values_[i]);
              first        = false;
            }
      }

      double quantile(const double u) const override
      {
        // F^{-1}(u) = min{ v_i : F(v_i) >= u }. For u in (0, 1) this never
        // returns a value of probability zero: its cumulative sum equals the
        // previous one, which is found first.
        const auto it = std::lower_bound(cumulative_.begin(), cumulative_.end(), u);
        return values_[std::min<std::size_t>(it - cumulative_.begin(), values_.size() - 1)];
      }
      double      mean() const override { return mean_; }
      double      variance() const override { return variance_; }
      double      support_min() const override { return support_min_; }
      double      support_max() const override { return support_max_; }
      std::string description() const override { return description_; }

      /**
       * Closed form: @f$p_i^\theta = p_i e^{-\theta v_i}/M@f$,
       * @f$\ln M = \ln\sum_i e^{\ln p_i - \theta v_i}@f$ (summed in log form,
       * so no term overflows).
       */
      TiltedLaw tilted(const double theta) const override
      {
        if (theta == 0.0)
          return untilted_copy(*this);
        std::vector<double> log_terms(values_.size());
        double              log_moment = -infinity;
        for (std::size_t i = 0; i < values_.size(); ++i)
          {
            log_terms[i] = probabilities_[i] > 0 ? std::log(probabilities_[i]) - theta * values_[i]
                                                 : -infinity;
            log_moment   = log_add_exp(log_moment, log_terms[i]);
          }
        if (!std::isfinite(log_moment))
          throw InputError("sampling/tilt = " + fmt(theta) + " is too strong for the law " +
                           description_ + "; choose a smaller |tilt|");
        std::vector<std::pair<double, double>> tilted_pairs;
        for (std::size_t i = 0; i < values_.size(); ++i)
          tilted_pairs.emplace_back(values_[i], std::exp(log_terms[i] - log_moment));
        TiltedLaw result;
        result.theta      = theta;
        result.log_moment = log_moment;
        result.law        = std::make_unique<DiscreteLaw>(std::move(tilted_pairs),
                                                   description_ + ", tilted by " + fmt(theta));
        return result;
      }

    private:
      std::vector<double> values_, probabilities_, cumulative_;
      double              mean_ = 0, variance_ = 0, support_min_ = 0, support_max_ = 0;
      std::string         description_;
    };


    /**
     * Normal law, optionally conditioned on [a, b]. The truncated quantile
     * maps u into [Φ(α), Φ(β)] and inverts; when the interval lies mostly
     * above the mean it uses the mirror image q ↦ 2μ − q, so the interval
     * end nearest the bulk is always handled where Φ is small and exact.
     */
    class GaussianLaw : public SingleSiteLaw
    {
    public:
      GaussianLaw(const double mu, const double sigma)
        : mu_(mu)
        , sigma_(sigma)
        , a_(-infinity)
        , b_(infinity)
        , mean_(mu)
        , variance_(sigma * sigma)
      {}

      GaussianLaw(const double mu, const double sigma, const double a, const double b)
        : mu_(mu)
        , sigma_(sigma)
        , a_(a)
        , b_(b)
        , truncated_(true)
      {
        const double alpha = (a - mu) / sigma, beta = (b - mu) / sigma;
        mirrored_          = alpha + beta > 0.0;
        if (!mirrored_)
          {
            start_ = standard_normal_cdf(alpha);
            mass_  = standard_normal_cdf(beta) - start_;
          }
        else
          {
            start_ = standard_normal_cdf(-beta);
            mass_  = standard_normal_cdf(-alpha) - start_;
          }
        // Johnson, Kotz & Balakrishnan, vol. 1, ch. 13 §10.1.
        const double phi_a = normal_density(alpha), phi_b = normal_density(beta);
        const double shift = (phi_a - phi_b) / mass_;
        mean_              = mu + sigma * shift;
        variance_ =
          sigma * sigma * (1.0 + (alpha * phi_a - beta * phi_b) / mass_ - shift * shift);
      }

      double quantile(const double u) const override
      {
        if (!truncated_)
          return mu_ + sigma_ * standard_normal_quantile(u);
        const double z = mirrored_ ? -standard_normal_quantile(start_ + (1.0 - u) * mass_)
                                   : standard_normal_quantile(start_ + u * mass_);
        // Rounding may step a last bit outside [a, b].
        return std::clamp(mu_ + sigma_ * z, a_, b_);
      }
      double      mean() const override { return mean_; }
      double      variance() const override { return variance_; }
      double      support_min() const override { return a_; }
      double      support_max() const override { return b_; }
      std::string description() const override
      {
        std::string text = "gaussian: mean " + fmt(mu_) + ", standard deviation " + fmt(sigma_);
        if (truncated_)
          text += ", truncated to [" + fmt(a_) + ", " + fmt(b_) + "]";
        return text;
      }

      /**
       * Closed form: @f$e^{-\theta q}\varphi((q-\mu)/\sigma)@f$ is a normal
       * density with mean @f$\mu - \theta\sigma^2@f$, so the tilted law is the
       * shifted normal (cut to the same [a, b] if truncated), and
       * @f$\ln M = -\theta\mu + \theta^2\sigma^2/2 + \ln(Z_\theta/Z)@f$ with Z,
       * Z_θ the masses of [a, b] under the two normals (1 untruncated).
       */
      TiltedLaw tilted(const double theta) const override
      {
        if (theta == 0.0)
          return untilted_copy(*this);
        const double shifted = mu_ - theta * sigma_ * sigma_;
        TiltedLaw    result;
        result.theta      = theta;
        result.log_moment = -theta * mu_ + 0.5 * theta * theta * sigma_ * sigma_;
        if (!std::isfinite(shifted) || !std::isfinite(result.log_moment))
          throw InputError("sampling/tilt = " + fmt(theta) + " is too strong for the law " +
                           description());
        if (!truncated_)
          {
            result.law = std::make_unique<GaussianLaw>(shifted, sigma_);
            return result;
          }
        const double reach = max_truncation_distance * sigma_;
        if (!(a_ < shifted + reach) || !(b_ > shifted - reach))
          throw InputError("sampling/tilt = " + fmt(theta) + " moves the mean of the " +
                           "truncated gaussian law to " + fmt(shifted) + ", more than " +
                           fmt(max_truncation_distance) + " standard deviations from [" +
                           fmt(a_) + ", " + fmt(b_) + "]; choose a smaller |tilt|");
        auto law = std::make_unique<GaussianLaw>(shifted, sigma_, a_, b_);
        result.log_moment += std::log(law->mass_) - std::log(mass_);
        result.law = std::move(law);
        return result;
      }

    private:
      double mu_, sigma_, a_, b_;
      bool   truncated_ = false;
      bool   mirrored_  = false;
      /** Φ at the interval end the quantile starts from, and Φ(β) − Φ(α). */
      double start_ = 0, mass_ = 1;
      double mean_ = 0, variance_ = 0;
    };


    /** Beta law scaled to [a, b]. */
    class BetaLaw : public SingleSiteLaw
    {
    public:
      BetaLaw(const double alpha, const double beta, const double a, const double b)
        : alpha_(alpha)
        , beta_(beta)
        , a_(a)
        , b_(b)
      {}
      double quantile(const double u) const override
      {
        // Measured from the nearer end, so that values close to either end
        // keep their distance to it to full relative precision.
        if (!(u > 0.5))
          return std::clamp(a_ + (b_ - a_) * beta_quantile(alpha_, beta_, u), a_, b_);
        // 1 − u is exact for u ≥ 1/2 (Sterbenz).
        const double y = beta_quantile(beta_, alpha_, 1.0 - u);
        return std::clamp(b_ - (b_ - a_) * y, a_, b_);
      }
      double mean() const override { return a_ + (b_ - a_) * alpha_ / (alpha_ + beta_); }
      double variance() const override
      {
        const double s = alpha_ + beta_;
        return (b_ - a_) * (b_ - a_) * alpha_ * beta_ / (s * s * (s + 1.0));
      }
      double      support_min() const override { return a_; }
      double      support_max() const override { return b_; }
      std::string description() const override
      {
        return "beta: shapes " + fmt(alpha_) + " (at minimum) and " + fmt(beta_) +
               " (at maximum) on [" + fmt(a_) + ", " + fmt(b_) + "]";
      }
      /** No closed-form quantile: tilted through its own quantile by quadrature. */
      TiltedLaw tilted(const double theta) const override
      {
        if (theta == 0.0)
          return untilted_copy(*this);
        return make_tilted_law_by_quadrature([law = *this](const double s) { return law.quantile(s); },
                                             a_, b_, theta, description());
      }

    private:
      double alpha_, beta_, a_, b_;
    };


    /**
     * Piecewise-linear density through (q_i, h_i). On piece i, with
     * s = q − q_i, Δ = q_{i+1} − q_i and k = (h_{i+1} − h_i)/Δ, the
     * distribution function is F = C_i + h_i s + k s²/2; the quantile solves
     * this quadratic with the cancellation-free root
     * s = 2r / (h_i + √(h_i² + 2 k r)), r = u − C_i.
     */
    class TabulatedLaw : public SingleSiteLaw
    {
    public:
      TabulatedLaw(std::vector<double> q, std::vector<double> h, double integral,
                   std::string source)
        : q_(std::move(q))
        , h_(std::move(h))
        , source_(std::move(source))
      {
        for (double &x : h_)
          x /= integral;
        cumulative_.assign(q_.size(), 0.0);
        first_piece_ = q_.size();
        for (std::size_t i = 0; i + 1 < q_.size(); ++i)
          {
            const double mass  = 0.5 * (q_[i + 1] - q_[i]) * (h_[i] + h_[i + 1]);
            cumulative_[i + 1] = cumulative_[i] + mass;
            if (mass > 0)
              {
                first_piece_ = std::min(first_piece_, i);
                last_piece_  = i;
              }
          }
        // Simpson's rule is exact for the (at most cubic) integrands below.
        const auto integrate = [&](const auto &g) {
          double sum = 0;
          for (std::size_t i = 0; i + 1 < q_.size(); ++i)
            {
              const double mid = 0.5 * (q_[i] + q_[i + 1]);
              sum += (q_[i + 1] - q_[i]) / 6.0 *
                     (g(q_[i]) * h_[i] + 4.0 * g(mid) * 0.5 * (h_[i] + h_[i + 1]) +
                      g(q_[i + 1]) * h_[i + 1]);
            }
          return sum;
        };
        mean_     = integrate([](const double x) { return x; });
        variance_ = integrate([&](const double x) { return (x - mean_) * (x - mean_); });
      }

      double quantile(const double u) const override
      {
        // The piece with C_i ≤ u < C_{i+1}, which has positive mass.
        const std::size_t j = std::upper_bound(cumulative_.begin(), cumulative_.end(), u) -
                              cumulative_.begin();
        const std::size_t i = std::clamp<std::size_t>(j == 0 ? 0 : j - 1, first_piece_,
                                                      last_piece_);
        const double width = q_[i + 1] - q_[i];
        const double r     = std::max(0.0, u - cumulative_[i]);
        const double k     = (h_[i + 1] - h_[i]) / width;
        const double root  = std::sqrt(std::max(0.0, h_[i] * h_[i] + 2.0 * k * r));
        const double denominator = h_[i] + root;
        const double s           = denominator > 0 ? 2.0 * r / denominator : 0.0;
        return std::min(q_[i] + std::min(s, width), q_[i + 1]);
      }
      double      mean() const override { return mean_; }
      double      variance() const override { return variance_; }
      double      support_min() const override { return q_[first_piece_]; }
      double      support_max() const override { return q_[last_piece_ + 1]; }
      std::string description() const override
      {
        return "tabulated density from " + source_ + " (" + std::to_string(q_.size()) +
               " points, support [" + fmt(support_min()) + ", " + fmt(support_max()) + "])";
      }
      /** Tilted through its own (exact) quantile by quadrature. */
      TiltedLaw tilted(const double theta) const override
      {
        if (theta == 0.0)
          return untilted_copy(*this);
        return make_tilted_law_by_quadrature([law = *this](const double s) { return law.quantile(s); },
                                             support_min(), support_max(), theta, description(),
                                             cumulative_);
      }

    private:
      std::vector<double> q_, h_, cumulative_;
      std::size_t         first_piece_ = 0, last_piece_ = 0;
      double              mean_ = 0, variance_ = 0;
      std::string         source_;
    };


    /**
     * q = q_lo + (q_hi − q_lo) K/n with K ~ Binomial(n, p) the number of
     * atoms of the species with the higher value, so that the quantile is
     * non-decreasing in u whatever the order of q_A and q_B.
     */
    class BinomialAlloyLaw : public SingleSiteLaw
    {
    public:
      BinomialAlloyLaw(const unsigned int n, const double x, const double q_a,
                       const double q_b)
        : n_(n)
        , x_(x)
        , q_a_(q_a)
        , q_b_(q_b)
      {
        const bool   a_high = q_a >= q_b;
        const double q_lo = a_high ? q_b : q_a, q_hi = a_high ? q_a : q_b;
        const double p    = a_high ? x : 1.0 - x;

        // Unnormalised probabilities from the mode outwards by the exact
        // ratio P(k+1)/P(k) = (n−k)/(k+1) · p/(1−p): no lgamma, whose
        // absolute error near ln n! ~ 1e7 would cost digits; the common
        // factor is fixed by normalising. Terms below ~1e-300 of the mode
        // underflow to 0 and are left out (probability < 1e-300).
        std::vector<double> w(n + 1, 0.0);
        if (p == 0.0)
          w[0] = 1.0;
        else if (p == 1.0)
          w[n] = 1.0;
        else
          {
            const unsigned int mode =
              std::min(n, static_cast<unsigned int>(std::floor((n + 1.0) * p)));
            const double odds = p / (1.0 - p);
            w[mode]           = 1.0;
            for (unsigned int k = mode; k > 0 && w[k] > 0; --k)
              w[k - 1] = w[k] * (k / (n - k + 1.0)) / odds;
            for (unsigned int k = mode; k < n && w[k] > 0; ++k)
              w[k + 1] = w[k] * ((n - k) / (k + 1.0)) * odds;
          }
        first_k_ = static_cast<unsigned int>(
          std::find_if(w.begin(), w.end(), [](double v) { return v > 0; }) - w.begin());
        unsigned int last_k = n;
        while (w[last_k] == 0.0)
          --last_k;
        double total = 0;
        for (unsigned int k = first_k_; k <= last_k; ++k)
          total += w[k];
        double cumulative = 0;
        for (unsigned int k = first_k_; k <= last_k; ++k)
          {
            cumulative += w[k] / total;
            cumulative_.push_back(cumulative);
            // The end points exactly, the rest as q_lo + Δ·(k/n).
            values_.push_back(k == n ? q_hi : q_lo + (q_hi - q_lo) * (k / double(n)));
          }
        // Exactly 1 so that every u < 1 finds an entry despite rounding.
        cumulative_.back() = 1.0;
        if (x == 0.0 || x == 1.0)
          support_min_ = support_max_ = (x == 1.0 ? q_a : q_b);
        else
          {
            support_min_ = q_lo;
            support_max_ = q_hi;
          }
      }

      double quantile(const double u) const override
      {
        // Smallest k with F(k) ≥ u.
        const auto it = std::lower_bound(cumulative_.begin(), cumulative_.end(), u);
        return values_[std::min<std::size_t>(it - cumulative_.begin(), values_.size() - 1)];
      }
      double mean() const override { return q_b_ + (q_a_ - q_b_) * x_; }
      double variance() const override
      {
        return (q_a_ - q_b_) * (q_a_ - q_b_) * x_ * (1.0 - x_) / n_;
      }
      double      support_min() const override { return support_min_; }
      double      support_max() const override { return support_max_; }
      std::string description() const override
      {
        return "binomial alloy: " + std::to_string(n_) + " atoms per cell, fraction " +
               fmt(x_) + " of A (value " + fmt(q_a_) + "), B value " + fmt(q_b_);
      }

      /**
       * Closed form: with d = (q_A − q_B)/n, @f$e^{-\theta q} \propto e^{-\theta d K}@f$
       * for K ~ Binomial(n, x), which is again binomial with
       * @f$x_\theta = x e^{-\theta d}/(1 - x + x e^{-\theta d})@f$, and
       * @f$\ln M = -\theta q_B + n\ln(1 - x + x e^{-\theta d})@f$.
       */
      TiltedLaw tilted(const double theta) const override
      {
        if (theta == 0.0)
          return untilted_copy(*this);
        const double d = (q_a_ - q_b_) / n_;
        const double log_a = x_ > 0 ? std::log(x_) - theta * d : -infinity;
        const double log_b = x_ < 1 ? std::log1p(-x_) : -infinity;
        const double log_sum = log_add_exp(log_a, log_b);
        TiltedLaw    result;
        result.theta      = theta;
        result.log_moment = -theta * q_b_ + n_ * log_sum;
        if (!std::isfinite(result.log_moment))
          throw InputError("sampling/tilt = " + fmt(theta) + " is too strong for the law " +
                           description());
        result.law = std::make_unique<BinomialAlloyLaw>(n_, std::exp(log_a - log_sum), q_a_, q_b_);
        return result;
      }

    private:
      unsigned int        n_;
      double              x_, q_a_, q_b_;
      unsigned int        first_k_ = 0;
      std::vector<double> cumulative_, values_;
      double              support_min_ = 0, support_max_ = 0;
    };
  } // namespace

  std::unique_ptr<SingleSiteLaw> make_uniform_law(const double a, const double b)
  {
    require_finite(a, "potential/minimum");
    require_finite(b, "potential/maximum");
    if (!(a < b))
      throw InputError("potential/maximum = " + fmt(b) +
                       " must be greater than potential/minimum = " + fmt(a));
    return std::make_unique<UniformLaw>(a, b);
  }


  std::unique_ptr<SingleSiteLaw> make_bernoulli_law(const double c, const double q_a,
                                                    const double q_b)
  {
    if (!(c >= 0.0 && c <= 1.0))
      throw InputError("potential/concentration = " + fmt(c) +
                       " is outside the allowed range [0, 1]");
    require_finite(q_a, "potential/value A");
    require_finite(q_b, "potential/value B");
    return std::make_unique<DiscreteLaw>(
      std::vector<std::pair<double, double>>{{q_a, c}, {q_b, 1.0 - c}},
      "bernoulli: " + fmt(q_a) + " with probability " + fmt(c) + ", else " + fmt(q_b));
  }


  std::unique_ptr<SingleSiteLaw> make_discrete_law(const std::vector<double> &values,
                                                   const std::vector<double> &probabilities)
  {
    if (values.empty() || values.size() > max_discrete_values)
      throw InputError("potential/values: " + std::to_string(values.size()) +
                       " values given, allowed are 1 to " +
                       std::to_string(max_discrete_values));
    if (probabilities.size() != values.size())
      throw InputError("potential/probabilities: " + std::to_string(probabilities.size()) +
                       " entries given, but potential/values has " +
                       std::to_string(values.size()) + "; the lists must have equal length");
    double sum = 0;
    std::vector<std::pair<double, double>> vp;
    std::ostringstream                     description;
    description << "discrete:";
    for (std::size_t i = 0; i < values.size(); ++i)
      {
        require_finite(values[i], "potential/values entry " + std::to_string(i + 1));
        if (!(probabilities[i] >= 0.0) || !std::isfinite(probabilities[i]))
          throw InputError("potential/probabilities: entry " + std::to_string(i + 1) + " = " +
                           fmt(probabilities[i]) + " is not allowed, it must be >= 0");
        sum += probabilities[i];
        vp.emplace_back(values[i], probabilities[i]);
        description << (i > 0 ? "," : "") << " " << fmt(values[i]) << " (p = "
                    << fmt(probabilities[i]) << ")";
      }
    if (std::abs(sum - 1.0) > probability_sum_tolerance)
      throw InputError("potential/probabilities: the entries sum to " + fmt(sum) +
                       ", they must sum to 1 within " + fmt(probability_sum_tolerance));
    return std::make_unique<DiscreteLaw>(std::move(vp), description.str());
  }



  std::unique_ptr<SingleSiteLaw> make_gaussian_law(const double mean,
                                                   const double standard_deviation)
  {
    require_finite(mean, "potential/mean");
    if (!(standard_deviation > 0.0) || !std::isfinite(standard_deviation))
      throw InputError("potential/standard deviation = " + fmt(standard_deviation) +
                       " is not allowed, it must be a finite number > 0");
    return std::make_unique<GaussianLaw>(mean, standard_deviation);
  }


  std::unique_ptr<SingleSiteLaw> make_truncated_gaussian_law(const double mean,
                                                             const double standard_deviation,
                                                             const double a, const double b)
  {
    make_gaussian_law(mean, standard_deviation); // checks mean and standard deviation
    require_finite(a, "potential/minimum");
    require_finite(b, "potential/maximum");
    if (!(a < b))
      throw InputError("potential/maximum = " + fmt(b) +
                       " must be greater than potential/minimum = " + fmt(a) +
                       " (truncated gaussian law)");
    const double reach = max_truncation_distance * standard_deviation;
    if (!(a < mean + reach) || !(b > mean - reach))
      throw InputError("potential/minimum = " + fmt(a) + ", potential/maximum = " + fmt(b) +
                       ": the truncation interval must meet [mean - " +
                       fmt(max_truncation_distance) + " sd, mean + " +
                       fmt(max_truncation_distance) + " sd] = [" + fmt(mean - reach) + ", " +
                       fmt(mean + reach) + "]");
    return std::make_unique<GaussianLaw>(mean, standard_deviation, a, b);
  }


  std::unique_ptr<SingleSiteLaw> make_beta_law(const double alpha, const double beta,
                                               const double a, const double b)
  {
    const auto check_shape = [](const double s, const std::string &name) {
      if (!(s >= min_beta_shape && s <= max_beta_shape))
        throw InputError(name + " = " + fmt(s) + " is outside the allowed range [" +
                         fmt(min_beta_shape) + ", " + fmt(max_beta_shape) + "]");
    };
    check_shape(alpha, "potential/shape at minimum");
    check_shape(beta, "potential/shape at maximum");
    require_finite(a, "potential/minimum");
    require_finite(b, "potential/maximum");
    if (!(a < b))
      throw InputError("potential/maximum = " + fmt(b) +
                       " must be greater than potential/minimum = " + fmt(a) + " (beta law)");
    return std::make_unique<BetaLaw>(alpha, beta, a, b);
  }


  std::unique_ptr<SingleSiteLaw> make_tabulated_law(const std::vector<double> &q,
                                                    const std::vector<double> &h,
                                                    const std::string         &source)
  {
    if (q.size() != h.size())
      throw InputError(source + ": " + std::to_string(q.size()) + " positions but " +
                       std::to_string(h.size()) + " density values");
    if (q.size() < 2)
      throw InputError(source + ": " + std::to_string(q.size()) +
                       " points given, a density needs at least 2");
    double integral = 0;
    for (std::size_t i = 0; i < q.size(); ++i)
      {
        const std::string point = source + ", point " + std::to_string(i + 1) + ": ";
        if (!std::isfinite(q[i]) || !std::isfinite(h[i]))
          throw InputError(point + "the numbers must be finite");
        if (h[i] < 0)
          throw InputError(point + "density " + fmt(h[i]) + " is negative");
        if (i > 0 && !(q[i] > q[i - 1]))
          throw InputError(point + "q = " + fmt(q[i]) +
                           " must be greater than the previous q = " + fmt(q[i - 1]));
        if (i > 0)
          integral += 0.5 * (q[i] - q[i - 1]) * (h[i] + h[i - 1]);
      }
    if (!(integral > 0) || !std::isfinite(integral))
      throw InputError(source + ": the density has integral " + fmt(integral) +
                       ", it must be positive and finite");
    return std::make_unique<TabulatedLaw>(q, h, integral, source);
  }


  std::unique_ptr<SingleSiteLaw> read_tabulated_law(const std::string &path)
  {
    std::ifstream in(path);
    if (!in)
      throw InputError("potential/density file: cannot open the density file '" + path + "'");
    std::vector<double> q, h;
    std::string         line;
    std::size_t         line_number = 0;
    const auto          where       = [&] {
      return "density file '" + path + "', line " + std::to_string(line_number) + ": ";
    };
    while (std::getline(in, line))
      {
        ++line_number;
        const std::vector<std::string> tokens = tokens_of_line(line);
        if (tokens.empty())
          continue;
        if (tokens.size() != 2)
          throw InputError(where() + "expected 2 fields (q and the density h(q)), found " +
                           std::to_string(tokens.size()));
        double values[2];
        for (unsigned int f = 0; f < 2; ++f)
          {
            if (!parse_double(tokens[f], values[f]))
              throw InputError(where() + "'" + tokens[f] + "' is not a number");
            if (!std::isfinite(values[f]))
              throw InputError(where() + "'" + tokens[f] + "' is not finite");
          }
        if (values[1] < 0)
          throw InputError(where() + "the density " + tokens[1] + " is negative");
        if (!q.empty() && !(values[0] > q.back()))
          throw InputError(where() + "q = " + tokens[0] +
                           " is not greater than the q of the previous point, " +
                           fmt(q.back()) + "; q must increase strictly");
        q.push_back(values[0]);
        h.push_back(values[1]);
      }
    if (in.bad())
      throw InputError("density file '" + path + "': read error after line " +
                       std::to_string(line_number));
    return make_tabulated_law(q, h, "density file '" + path + "'");
  }


  std::unique_ptr<SingleSiteLaw> make_binomial_alloy_law(const unsigned int n_atoms,
                                                         const double x, const double q_a,
                                                         const double q_b)
  {
    if (n_atoms < 1 || n_atoms > max_atoms_per_cell)
      throw InputError("potential/atoms per cell = " + std::to_string(n_atoms) +
                       " is outside the allowed range [1, " +
                       std::to_string(max_atoms_per_cell) + "]");
    if (!(x >= 0.0 && x <= 1.0))
      throw InputError("potential/concentration = " + fmt(x) +
                       " is outside the allowed range [0, 1]");
    require_finite(q_a, "potential/value A");
    require_finite(q_b, "potential/value B");
    return std::make_unique<BinomialAlloyLaw>(n_atoms, x, q_a, q_b);
  }


  double standard_normal_cdf(const double x)
  {
    return 0.5 * std::erfc(-x / std::sqrt(2.0));
  }


  double standard_normal_quantile(const double u)
  {
    if (std::isnan(u) || u < 0.0 || u > 1.0)
      return std::numeric_limits<double>::quiet_NaN();
    if (u == 0.0)
      return -infinity;
    if (u == 1.0)
      return infinity;
    const boost::math::normal_distribution<double, DoublePolicy> standard_normal(0.0, 1.0);
    // Evaluated in the lower half and mirrored, so both tails have the same
    // relative accuracy; 1 − u is exact for u ≥ 1/2 (Sterbenz).
    if (u > 0.5)
      return -boost::math::quantile(standard_normal, 1.0 - u);
    return boost::math::quantile(standard_normal, u);
  }


  double incomplete_beta_ratio(const double a, const double b, const double x)
  {
    if (!(x > 0.0))
      return 0.0;
    if (!(x < 1.0))
      return 1.0;
    return boost::math::ibeta(a, b, x, DoublePolicy());
  }


  double beta_quantile(const double a, const double b, const double u)
  {
    if (!(u > 0.0))
      return 0.0;
    if (!(u < 1.0))
      return 1.0;
    if (u <= 0.5)
      return lower_beta_quantile(a, b, u);
    // 1 − u is exact for u ≥ 1/2 (Sterbenz).
    return 1.0 - lower_beta_quantile(b, a, 1.0 - u);
  }
} // namespace alloyspec
