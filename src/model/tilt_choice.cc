/** @file tilt_choice.cc  The cross-entropy update of the tilt. */
#include <alloyspec/core/errors.h>
#include <alloyspec/model/tilt_choice.h>

#include <algorithm>
#include <cmath>
#include <limits>
#include <stdexcept>

namespace alloyspec
{
  namespace
  {
    /**
     * Σ_l c_l φ_l E_{θφ_l}[q] / Σ_l c_l φ_l (E_θ[q] without a profile), or NaN
     * when the law cannot be tilted that far.
     */
    double tilted_mean(const SingleSiteLaw &law, const double theta, const TiltProfile *profile)
    {
      try
        {
          if (!profile)
            return law.tilted(theta).law->mean();
          double sum = 0, norm = 0;
          for (std::size_t l = 0; l < profile->levels().size(); ++l)
            {
              const double weight = double(profile->multiplicities()[l]) * profile->levels()[l];
              sum += weight * law.tilted(theta * profile->levels()[l]).law->mean();
              norm += weight;
            }
          return sum / norm;
        }
      catch (const InputError &)
        {
          return std::numeric_limits<double>::quiet_NaN();
        }
    }
  } // namespace

  namespace
  {
    /**
     * θ with tilted_mean(θ) = @p wanted: bracketed by doubling up to
     * @p max_abs_tilt and the tilts the law can represent, then bisected (the
     * tilted mean falls strictly with θ).
     */
    double solve_tilted_mean(const SingleSiteLaw &law, const double wanted,
                             const double max_abs_tilt, const TiltProfile *profile)
    {
      double       lo = 0, hi = 0;
      const double m0 = law.mean();
      if (wanted < m0)
        for (double t = 1e-3; t <= max_abs_tilt; t *= 2)
          {
            const double m = tilted_mean(law, t, profile);
            if (std::isnan(m))
              break;
            hi = t;
            if (m <= wanted)
              break;
          }
      else
        for (double t = 1e-3; t <= max_abs_tilt; t *= 2)
          {
            const double m = tilted_mean(law, -t, profile);
            if (std::isnan(m))
              break;
            lo = -t;
            if (m >= wanted)
              break;
          }
      // Bisection on the monotone map θ ↦ E_θ[q]; 60 halvings reach rounding.
      for (int i = 0; i < 60 && hi - lo > 1e-12 * std::max(1.0, std::abs(hi)); ++i)
        {
          const double middle = 0.5 * (lo + hi);
          const double m      = tilted_mean(law, middle, profile);
          if (std::isnan(m))
            break;
          if (m > wanted)
            lo = middle;
          else
            hi = middle;
        }
      return 0.5 * (lo + hi);
    }
  } // namespace

  double cross_entropy_tilt(const SingleSiteLaw &law, const std::vector<PilotSample> &elite,
                            const double max_abs_tilt, const TiltProfile *profile)
  {
    if (elite.empty())
      throw std::invalid_argument("cross_entropy_tilt: no elite sample");
    // Σ w q̄ / Σ w with the weights scaled by the largest (no overflow).
    double top = -std::numeric_limits<double>::infinity();
    for (const auto &s : elite)
      top = std::max(top, s.log_weight);
    double sum_w = 0, sum_wq = 0;
    for (const auto &s : elite)
      {
        const double w = std::exp(s.log_weight - top);
        sum_w += w;
        sum_wq += w * s.mean_cell_value;
      }
    return solve_tilted_mean(law, sum_wq / sum_w, max_abs_tilt, profile);
  }

  double cross_entropy_window_tilt(const SingleSiteLaw &law,
                                   const std::vector<WindowPilotSample> &elite,
                                   const TiltProfile &profile, const double untilted_share,
                                   const double start, const double max_abs_tilt)
  {
    if (elite.empty())
      throw std::invalid_argument("cross_entropy_window_tilt: no elite sample");
    if (!(untilted_share > 0.0 && untilted_share < 1.0))
      throw std::invalid_argument("cross_entropy_window_tilt: the untilted share must lie in (0, 1)");
    (void)start; // the objective is maximised over θ directly, wherever the elite was drawn
    double top = -std::numeric_limits<double>::infinity();
    for (const auto &s : elite)
      {
        top = std::max(top, s.log_weight);
        if (s.window_means.empty())
          throw std::invalid_argument("cross_entropy_window_tilt: a sample without windows");
      }
    double phi_sum = 0;
    for (std::size_t l = 0; l < profile.levels().size(); ++l)
      phi_sum += double(profile.multiplicities()[l]) * profile.levels()[l];
    // F'(θ) ∝ D(θ) = g(θ) − T(θ): g the profile's tilted mean, T the
    // responsibility-weighted elite window mean at θ. NaN where the law cannot
    // be tilted that far.
    const auto slope = [&](const double theta) {
      const double g = tilted_mean(law, theta, &profile);
      if (std::isnan(g))
        return g;
      double log_moments = 0; // Σ_j ln M(θ φ_j), common to every window
      for (std::size_t l = 0; l < profile.levels().size() && theta != 0.0; ++l)
        log_moments += double(profile.multiplicities()[l]) *
                       law.tilted(theta * profile.levels()[l]).log_moment;
      double sum = 0, norm = 0;
      for (const auto &s : elite)
        {
          const std::size_t K         = s.window_means.size();
          const double      log_share = std::log1p(-untilted_share) - std::log(double(K));
          // Responsibilities in log form: ln a_c = ln((1−α)/K) − ℓ_c, ln a_0 = ln α.
          std::vector<double> log_a(K);
          double              largest = std::log(untilted_share);
          for (std::size_t c = 0; c < K; ++c)
            {
              log_a[c] = log_share - (theta * phi_sum * s.window_means[c] + log_moments);
              largest  = std::max(largest, log_a[c]);
            }
          double total = std::exp(std::log(untilted_share) - largest);
          for (const double x : log_a)
            total += std::exp(x - largest);
          const double w = std::exp(s.log_weight - top);
          for (std::size_t c = 0; c < K; ++c)
            {
              const double gamma = std::exp(log_a[c] - largest) / total;
              sum += w * gamma * s.window_means[c];
              norm += w * gamma;
            }
        }
      return g - sum / norm;
    };
    // Bracket a sign change of D by doubling away from 0 in the direction D(0)
    // points to, then bisect: D > 0 means the objective still rises with θ.
    const double d0 = slope(0.0);
    if (d0 == 0.0)
      return 0.0;
    const double direction = d0 > 0 ? 1.0 : -1.0;
    double       inner = 0, outer = 0;
    bool         bracketed = false;
    for (double t = 1e-3; t <= max_abs_tilt; t *= 2)
      {
        const double d = slope(direction * t);
        if (std::isnan(d))
          break;
        outer = t;
        if (d * direction <= 0)
          {
            bracketed = true;
            break;
          }
        inner = t;
      }
    if (!bracketed)
      return direction * outer; // the objective rises as far as the law can be tilted
    for (int i = 0; i < 60 && outer - inner > 1e-12 * std::max(1.0, outer); ++i)
      {
        const double middle = 0.5 * (inner + outer);
        const double d      = slope(direction * middle);
        if (std::isnan(d) || d * direction <= 0)
          outer = middle;
        else
          inner = middle;
      }
    return direction * 0.5 * (inner + outer);
  }

  unsigned int window_for_energy(const double excess, const double cell_size,
                                 const unsigned int dimension)
  {
    if (!(excess > 0.0) || !(cell_size > 0.0) || dimension == 0)
      throw std::invalid_argument("window_for_energy: need E − E0 > 0, a cell size and a dimension");
    const double pi    = 3.14159265358979323846;
    const double edge  = pi * std::sqrt(double(dimension) / excess) / cell_size;
    const double cells = std::ceil(edge * (1.0 - 1e-12)); // an exact fit is not rounded up
    return cells < 1.0 ? 1u : cells > 1e5 ? 100000u : static_cast<unsigned int>(cells);
  }
} // namespace alloyspec
