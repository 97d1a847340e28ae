/** @file tilted_laws.cc  The tilted uniform law in closed form, and tilting by quadrature in the probability variable. */
#include <alloyspec/core/errors.h>
#include <alloyspec/core/format.h>
#include <alloyspec/model/tilted_laws.h>

#include <boost/math/quadrature/gauss_kronrod.hpp>

#include <algorithm>
#include <cmath>
#include <limits>
#include <memory>
#include <sstream>
#include <utility>
#include <vector>

namespace alloyspec
{
  namespace
  {
    std::string fmt(const double x) { return short_number(x, 12); }

    /**
     * Mean and variance of the exponential law of rate λ > 0 cut to [0, Δ],
     * t = λΔ: mean = Δ(1/t − 1/expm1(t)), variance = Δ²(1/t² − e^t/expm1(t)²).
     * Below |t| = 1e-3 both cancel badly; there the series
     * Δ(1/2 − t/12 + t³/720) and Δ²(1/12 − t²/240) are exact to rounding
     * (next terms t⁵/30240 and t⁴/6048 relative).
     */
    std::pair<double, double> truncated_exponential_moments(const double rate,
                                                            const double width)
    {
      const double t = rate * width;
      if (t < 1e-3)
        return {width * (0.5 - t / 12.0 + t * t * t / 720.0),
                width * width * (1.0 / 12.0 - t * t / 240.0)};
      const double e = std::expm1(t);
      if (!std::isfinite(e))
        return {1.0 / rate, 1.0 / (rate * rate)}; // e^{-t} below rounding
      return {width * (1.0 / t - 1.0 / e),
              width * width * (1.0 / (t * t) - (e + 1.0) / (e * e))};
    }

    class TiltedUniformLaw : public SingleSiteLaw
    {
    public:
      TiltedUniformLaw(const double a, const double b, const double theta)
        : a_(a)
        , b_(b)
        , theta_(theta)
        , t_(theta * (b - a))
      {
        const auto [m, v] = truncated_exponential_moments(std::abs(theta), b - a);
        mean_             = theta > 0 ? a + m : b - m;
        variance_         = v;
      }
      double quantile(const double u) const override
      {
        const double q = theta_ > 0 ? a_ - std::log1p(u * std::expm1(-t_)) / theta_
                                    : b_ - std::log1p((1.0 - u) * std::expm1(t_)) / theta_;
        return std::clamp(q, a_, b_);
      }
      double      mean() const override { return mean_; }
      double      variance() const override { return variance_; }
      double      support_min() const override { return a_; }
      double      support_max() const override { return b_; }
      std::string description() const override
      {
        return "uniform on [" + fmt(a_) + ", " + fmt(b_) + "] tilted by " + fmt(theta_);
      }
      TiltedLaw tilted(const double theta) const override
      {
        // Tilts add: e^{-θ₂q} e^{-θ₁q} p = e^{-(θ₁+θ₂)q} p.
        TiltedLaw base = make_tilted_uniform_law(a_, b_, theta_ + theta);
        TiltedLaw self = make_tilted_uniform_law(a_, b_, theta_);
        base.log_moment -= self.log_moment;
        base.theta = theta;
        return base;
      }

    private:
      double a_, b_, theta_, t_, mean_ = 0, variance_ = 0;
    };


    /** See make_tilted_law_by_quadrature(). */
    class QuadratureTiltedLaw : public SingleSiteLaw
    {
    public:
      QuadratureTiltedLaw(std::function<double(double)> quantile, const double support_min,
                          const double support_max, const double theta, std::string description,
                          const std::vector<double> &breakpoints)
        : base_(std::move(quantile))
        , support_min_(support_min)
        , support_max_(support_max)
        , theta_(theta)
        , reference_(theta > 0 ? support_min : support_max)
        , description_(std::move(description))
        , breakpoints_(breakpoints)
      {
        // Base nodes: 0, 2^-200, ..., 1/4, 1/2, 1 - 1/4, ..., 1 - 2^-53, 1.
        // Towards 1 the spacing of doubles is 2^-53, so no finer node exists
        // there; towards 0, [0, 2^-200] holds at most 2^-200 of G(1)·e^{θ q_ref}
        // scaled mass (g ≤ 1), which is checked below to be negligible.
        std::vector<double> base_nodes{0.0};
        for (int k = smallest_node_exponent; k >= 1; --k)
          base_nodes.push_back(std::ldexp(1.0, -k));
        for (int k = 2; k <= 53; ++k)
          base_nodes.push_back(1.0 - std::ldexp(1.0, -k));
        base_nodes.push_back(1.0);
        // Kinks of Q (where the density vanishes or jumps) become nodes, so
        // that no Gauss–Kronrod interval straddles one.
        for (const double b : breakpoints)
          if (b > 0.0 && b < 1.0)
            base_nodes.push_back(b);
        std::sort(base_nodes.begin(), base_nodes.end());
        base_nodes.erase(std::unique(base_nodes.begin(), base_nodes.end()), base_nodes.end());

        // A first estimate of G(1) sets the absolute tolerance, so that
        // intervals carrying a negligible share are not refined.
        for (std::size_t i = 0; i + 1 < base_nodes.size(); ++i)
          total_estimate_ += Integrator::integrate([&](const double s) { return g(s); },
                                                   base_nodes[i], base_nodes[i + 1], 0, 0.0);
        nodes_.push_back(0.0);
        cumulative_.push_back(0.0);
        for (std::size_t i = 0; i + 1 < base_nodes.size(); ++i)
          refine(base_nodes[i], base_nodes[i + 1], 0);
        total_ = cumulative_.back();
        if (!(total_ > min_total) || !std::isfinite(total_) ||
            (theta > 0 && std::ldexp(1.0, -smallest_node_exponent) > 1e-15 * total_))
          throw InputError("sampling/tilt = " + fmt(theta) +
                           " is too strong for the law " + description_ +
                           ": the tilted weight underflows; choose a smaller |tilt|");
        log_moment_ = -theta * reference_ + std::log(total_);

        // Moments of the tilted law from the same intervals (refined for
        // both g and (Q − q_ref) g), measured from q_ref to avoid cancellation.
        mean_ = reference_ + first_moment_ / total_;
        double second = 0;
        for (std::size_t i = 0; i + 1 < nodes_.size(); ++i)
          second += Integrator::integrate(
            [&](const double s) {
              const double d = base_(s) - mean_;
              return d * d * g(s);
            },
            nodes_[i], nodes_[i + 1], 0, 0.0);
        variance_ = second / total_;
      }

      double quantile(const double v) const override
      {
        const double target = v * total_;
        // The interval [s_i, s_{i+1}] with C_i ≤ target < C_{i+1}.
        const std::size_t j =
          std::upper_bound(cumulative_.begin(), cumulative_.end(), target) - cumulative_.begin();
        const std::size_t i = std::min(j == 0 ? 0 : j - 1, nodes_.size() - 2);
        double lo = nodes_[i], hi = nodes_[i + 1];
        const double rest = target - cumulative_[i];
        // Start by linear interpolation of G, then safeguarded Newton:
        // G'(s) = g(s) > 0, G convex or concave per interval (g monotone).
        const double mass = cumulative_[i + 1] - cumulative_[i];
        double       s    = mass > 0 ? lo + (hi - lo) * std::clamp(rest / mass, 0.0, 1.0) : lo;
        for (int iteration = 0; iteration < max_newton_steps; ++iteration)
          {
            const double h = Integrator::integrate([&](const double t) { return g(t); },
                                                   nodes_[i], s, 0, 0.0) -
                             rest;
            if (h > 0)
              hi = s;
            else
              lo = s;
            const double slope = g(s);
            double       next  = slope > 0 ? s - h / slope : 0.5 * (lo + hi);
            if (!(next > lo && next < hi))
              next = 0.5 * (lo + hi);
            if (std::abs(next - s) <= newton_tolerance * std::max(s, 1e-300) ||
                hi - lo <= newton_tolerance * hi)
              {
                s = next;
                break;
              }
            s = next;
          }
        return std::clamp(base_(std::clamp(s, 1e-320, 1.0)), support_min_, support_max_);
      }
      double      mean() const override { return mean_; }
      double      variance() const override { return variance_; }
      double      support_min() const override { return support_min_; }
      double      support_max() const override { return support_max_; }
      std::string description() const override
      {
        return description_ + " tilted by " + fmt(theta_);
      }
      TiltedLaw tilted(const double theta) const override
      {
        TiltedLaw result =
          make_tilted_law_by_quadrature(base_, support_min_, support_max_, theta_ + theta,
                                        description_, breakpoints_);
        result.log_moment -= log_moment_;
        result.theta = theta;
        return result;
      }
      double log_moment() const { return log_moment_; }

    private:
      using Integrator = boost::math::quadrature::gauss_kronrod<double, 15>;
      /** Relative agreement of the Kronrod and Gauss estimates that ends refinement. */
      static constexpr double quadrature_tolerance = 1e-13;
      /** Depth of bisection of one base interval: 2^-40 of it is far below any feature. */
      static constexpr int    max_depth            = 40;
      /** Interval errors below this share of G(1) are accepted whatever their relative size. */
      static constexpr double absolute_share = 1e-16;
      /** The finest base node near s = 0 is 2^-this. */
      static constexpr int    smallest_node_exponent = 200;
      static constexpr int    max_newton_steps     = 60;
      /** Newton stops when a step changes s by less than this relative amount. */
      static constexpr double newton_tolerance     = 1e-14;
      /** Below this G(1) the tilted law is not representable (its log-weight overflows). */
      static constexpr double min_total            = 1e-280;

      double g(const double s) const
      {
        return std::exp(-theta_ * (base_(std::max(s, 1e-320)) - reference_));
      }

      void refine(const double a, const double b, const int depth)
      {
        // Boost reports the relative error estimate |K15 − G7|/L1.
        double       error = 0, moment_error = 0;
        const double value =
          Integrator::integrate([&](const double s) { return g(s); }, a, b, 0, 0.0, &error);
        const double moment = Integrator::integrate(
          [&](const double s) { return (base_(s) - reference_) * g(s); }, a, b, 0, 0.0,
          &moment_error);
        const double width = support_max_ - support_min_;
        if (depth < max_depth &&
            ((error > quadrature_tolerance && error * value > absolute_share * total_estimate_) ||
             (moment_error > quadrature_tolerance &&
              moment_error * std::abs(moment) > absolute_share * width * total_estimate_)))
          {
            const double middle = 0.5 * (a + b);
            refine(a, middle, depth + 1);
            refine(middle, b, depth + 1);
            return;
          }
        nodes_.push_back(b);
        cumulative_.push_back(cumulative_.back() + value);
        first_moment_ += moment;
      }

      std::function<double(double)> base_;
      double                        support_min_, support_max_, theta_, reference_;
      std::string                   description_;
      std::vector<double>           breakpoints_, nodes_, cumulative_;
      double                        total_estimate_ = 0, first_moment_ = 0, total_ = 0, log_moment_ = 0, mean_ = 0, variance_ = 0;
    };
  } // namespace


  double log_add_exp(const double x, const double y)
  {
    if (x == -std::numeric_limits<double>::infinity())
      return y;
    if (y == -std::numeric_limits<double>::infinity())
      return x;
    const double high = std::max(x, y), low = std::min(x, y);
    return high + std::log1p(std::exp(low - high));
  }


  TiltedLaw make_tilted_uniform_law(const double a, const double b, const double theta)
  {
    TiltedLaw result;
    result.theta = theta;
    if (theta == 0.0)
      {
        result.law        = make_uniform_law(a, b);
        result.log_moment = 0.0;
        return result;
      }
    const double t = theta * (b - a);
    if (!std::isfinite(t))
      throw InputError("sampling/tilt = " + fmt(theta) + " is not allowed for the uniform law");
    result.log_moment = theta > 0 ? -theta * a + std::log(-std::expm1(-t) / t)
                                  : -theta * b + std::log(std::expm1(t) / t);
    result.law        = std::make_unique<TiltedUniformLaw>(a, b, theta);
    return result;
  }


  TiltedLaw make_tilted_law_by_quadrature(std::function<double(double)> quantile,
                                          const double support_min, const double support_max,
                                          const double theta, const std::string &description,
                                          const std::vector<double> &breakpoints)
  {
    if (theta == 0.0)
      throw std::logic_error("make_tilted_law_by_quadrature: θ = 0 is the law itself");
    auto law = std::make_unique<QuadratureTiltedLaw>(std::move(quantile), support_min,
                                                     support_max, theta, description,
                                                     breakpoints);
    TiltedLaw result;
    result.theta      = theta;
    result.log_moment = law->log_moment();
    result.law        = std::move(law);
    return result;
  }
} // namespace alloyspec
