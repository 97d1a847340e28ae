#include <alloyspec/core/errors.h>
#include <alloyspec/model/exact_1d.h>

#include <algorithm>
#include <cmath>

namespace alloyspec
{
  Exact1dSpectrum::Exact1dSpectrum(std::vector<double> cell_values, double cell_size, Boundary bc)
    : v_(std::move(cell_values))
    , a_(cell_size)
    , bc_(bc)
  {
    if (v_.empty() || !(a_ > 0) || bc == Boundary::periodic)
      throw InputError("Exact1dSpectrum: needs cells, a positive cell size and Dirichlet or "
                       "Neumann conditions");
  }

  std::size_t Exact1dSpectrum::count_below(const double lambda) const
  {
    constexpr double pi = 3.14159265358979323846;
    double      u = 0, du = 1;
    if (bc_ == Boundary::neumann)
      u = 1, du = 0;
    std::size_t zeros = 0; // zeros of u in (0, x]
    for (const double v : v_)
      {
        // Only the direction of (u, u') matters: rescale against overflow.
        const double norm = std::hypot(u, du);
        u /= norm;
        du /= norm;
        // Zeros do not depend on the sign of the solution: keep u ≥ 0 at the start.
        if (u < 0 || (u == 0 && du < 0))
          u = -u, du = -du;
        const double d = lambda - v;
        double       u1 = 0, du1 = 0;
        if (d > 0)
          {
            const double k = std::sqrt(d);
            // u = R sin(φ0 + k t), u'/k = R cos(φ0 + k t) with φ0 ∈ [0, π).
            const double phi0 = std::atan2(k * u, du);
            const double phi1 = phi0 + k * a_;
            zeros += static_cast<std::size_t>(std::floor(phi1 / pi));
            const double r = std::hypot(k * u, du) / k;
            u1             = r * std::sin(phi1);
            du1            = r * k * std::cos(phi1);
            if (std::floor(phi1 / pi) * pi == phi1)
              u1 = 0; // exactly at a zero: avoid a rounding sign
          }
        else
          {
            // Evanescent (or linear when d = 0): at most one zero in (0, a],
            // present iff u changes sign (u(0) ≥ 0 here, u(0) = 0 is not in (0, a]).
            if (d < 0)
              {
                const double kappa = std::sqrt(-d);
                const double c = std::cosh(kappa * a_), s = std::sinh(kappa * a_);
                u1  = u * c + du / kappa * s;
                du1 = u * kappa * s + du * c;
              }
            else
              {
                u1  = u + du * a_;
                du1 = du;
              }
            if (u > 0 && u1 <= 0)
              ++zeros;
          }
        u  = u1;
        du = du1;
      }
    // A zero exactly at the right end is an eigenvalue (Dirichlet), not below λ.
    if (bc_ == Boundary::dirichlet)
      return (u == 0 && zeros > 0) ? zeros - 1 : zeros;
    return zeros + ((u * du < 0) ? 1 : 0);
  }

  std::vector<double> Exact1dSpectrum::lowest(const std::size_t count) const
  {
    constexpr double pi     = 3.14159265358979323846;
    const double     v_min  = *std::min_element(v_.begin(), v_.end());
    const double     v_max  = *std::max_element(v_.begin(), v_.end());
    const double     length = a_ * v_.size();
    std::vector<double> values;
    for (std::size_t j = 0; j < count; ++j)
      {
        // H ≥ min v; by min-max λ_j ≤ max v + (π (j+1)/ℓ)² (Dirichlet ≥ Neumann).
        double lo = v_min - 1.0;
        double hi = v_max + std::pow(pi * (j + 1) / length, 2) + 1.0;
        for (int it = 0; it < 200 && hi - lo > 4e-16 * std::max(1.0, std::abs(hi)); ++it)
          {
            const double mid = 0.5 * (lo + hi);
            (count_below(mid) > j ? hi : lo) = mid;
          }
        values.push_back(0.5 * (lo + hi));
      }
    return values;
  }
} // namespace alloyspec
