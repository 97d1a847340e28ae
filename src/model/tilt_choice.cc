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
    const double wanted = sum_wq / sum_w;

    // Bracket: the largest representable tilt in each direction (doubling).
    double lo = 0, hi = 0;
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
} // namespace alloyspec
