/** @file tail_fits.cc  Weighted least squares, quantiles, extrapolation in 1/L, tail fits. */
#include <alloyspec/analysis/tail_fits.h>

#include <algorithm>
#include <cmath>
#include <optional>
#include <limits>
#include <sstream>
#include <stdexcept>

namespace alloyspec
{
  namespace
  {
    constexpr double pi = 3.14159265358979323846;

    /** Bisection for an increasing function @p f on [lo, hi] with f(lo) ≤ target ≤ f(hi). */
    template <typename F>
    double bisect(F f, double target, double lo, double hi)
    {
      for (int it = 0; it < 200 && hi - lo > 1e-14 * std::max(1.0, std::abs(hi)); ++it)
        {
          const double mid = 0.5 * (lo + hi);
          (f(mid) < target ? lo : hi) = mid;
        }
      return 0.5 * (lo + hi);
    }

    /** A(t|ν) = P(|T| ≤ t) for integer ν (Abramowitz & Stegun 26.7.3–4). */
    double student_t_central(const double t, const unsigned int dof)
    {
      const double theta = std::atan(t / std::sqrt(double(dof)));
      const double s = std::sin(theta), c = std::cos(theta), c2 = c * c;
      if (dof % 2 == 1)
        {
          if (dof == 1)
            return 2.0 * theta / pi;
          // cosθ + (2/3)cos³θ + … + (2·4⋯(ν−3))/(1·3⋯(ν−2)) cos^{ν−2}θ
          double term = c, sum = c;
          for (unsigned int k = 3; k + 2 <= dof; k += 2)
            {
              term *= c2 * double(k - 1) / double(k);
              sum += term;
            }
          return 2.0 / pi * (theta + s * sum);
        }
      // 1 + (1/2)cos²θ + (1·3)/(2·4)cos⁴θ + … + (1·3⋯(ν−3))/(2·4⋯(ν−2)) cos^{ν−2}θ
      double term = 1.0, sum = 1.0;
      for (unsigned int k = 2; k + 2 <= dof; k += 2)
        {
          term *= c2 * double(k - 1) / double(k);
          sum += term;
        }
      return s * sum;
    }

    /**
     * Straight line y = a + b x by weighted least squares, with the slope's
     * Student-t interval. Returns why the line cannot be fitted (all x equal
     * to rounding, as when a huge potential pushes every level into one bin),
     * or nothing: a fit that cannot be made is a tail not resolved, never a
     * reason to lose the tables.
     */
    std::optional<std::string> fit_line(const std::vector<double> &x, const std::vector<double> &y,
                                        const std::vector<double> &sigma, const double confidence,
                                        TailFit &fit)
    {
      std::vector<std::vector<double>> design;
      for (const double xi : x)
        design.push_back({1.0, xi});
      LinearFit line;
      try
        {
          line = weighted_least_squares(design, y, sigma);
        }
      catch (const std::invalid_argument &e)
        {
          return std::string(e.what());
        }
      fit.intercept   = line.parameters[0];
      fit.slope       = line.parameters[1];
      fit.chi_squared = line.chi_squared;
      fit.dof         = line.dof;
      // Residual scale estimated from the scatter (s² = χ²/ν): the σ_i from
      // the delta method are only approximately right, and the t quantile then
      // gives the interval its nominal coverage for Gaussian errors.
      const double scale = line.dof > 0 ? std::sqrt(line.chi_squared / double(line.dof)) : 0.0;
      fit.slope_error    = std::sqrt(line.covariance[1][1]) * scale;
      const double t     = line.dof > 0 ? student_t_quantile(0.5 + confidence / 2, unsigned(line.dof))
                                        : std::numeric_limits<double>::infinity();
      fit.slope_low      = fit.slope - t * fit.slope_error;
      fit.slope_high     = fit.slope + t * fit.slope_error;
      return std::nullopt;
    }
  } // namespace

  double normal_quantile(const double p)
  {
    if (!(p > 0.0 && p < 1.0))
      throw std::invalid_argument("normal_quantile: p must lie in (0, 1)");
    const auto cdf = [](double z) { return 0.5 * std::erfc(-z / std::sqrt(2.0)); };
    return bisect(cdf, p, -40.0, 40.0);
  }

  double student_t_quantile(const double p, const unsigned int dof)
  {
    if (!(p > 0.0 && p < 1.0) || dof == 0)
      throw std::invalid_argument("student_t_quantile: need 0 < p < 1 and dof >= 1");
    if (p == 0.5)
      return 0.0;
    const double target = std::abs(2.0 * p - 1.0);
    double       hi     = 1.0;
    while (student_t_central(hi, dof) < target && hi < 1e300)
      hi *= 2.0;
    const double t = bisect([dof](double u) { return student_t_central(u, dof); }, target, 0.0, hi);
    return p > 0.5 ? t : -t;
  }

  LinearFit weighted_least_squares(const std::vector<std::vector<double>> &design,
                                   const std::vector<double> &y, const std::vector<double> &sigma)
  {
    const std::size_t n = y.size();
    if (design.size() != n || sigma.size() != n || n == 0)
      throw std::invalid_argument("weighted_least_squares: sizes differ or no data");
    const std::size_t p = design[0].size();
    if (p == 0 || n < p)
      throw std::invalid_argument("weighted_least_squares: fewer points than parameters");
    // Normal equations A β = v with A = XᵀWX; p ≤ 3 here, so their conditioning
    // is harmless, and columns are scaled to unit norm before inversion.
    std::vector<std::vector<double>> a(p, std::vector<double>(p, 0.0));
    std::vector<double>              v(p, 0.0);
    for (std::size_t i = 0; i < n; ++i)
      {
        if (!(sigma[i] > 0.0) || !std::isfinite(sigma[i]) || design[i].size() != p)
          throw std::invalid_argument("weighted_least_squares: sigma must be positive and finite");
        const double w = 1.0 / (sigma[i] * sigma[i]);
        for (std::size_t k = 0; k < p; ++k)
          {
            v[k] += w * design[i][k] * y[i];
            for (std::size_t l = 0; l < p; ++l)
              a[k][l] += w * design[i][k] * design[i][l];
          }
      }
    std::vector<double> scale(p);
    for (std::size_t k = 0; k < p; ++k)
      {
        if (!(a[k][k] > 0.0))
          throw std::invalid_argument("weighted_least_squares: singular design");
        scale[k] = 1.0 / std::sqrt(a[k][k]);
      }
    // Gauss–Jordan inversion of the scaled matrix with partial pivoting.
    std::vector<std::vector<double>> m(p, std::vector<double>(2 * p, 0.0));
    for (std::size_t k = 0; k < p; ++k)
      {
        for (std::size_t l = 0; l < p; ++l)
          m[k][l] = a[k][l] * scale[k] * scale[l];
        m[k][p + k] = 1.0;
      }
    for (std::size_t col = 0; col < p; ++col)
      {
        std::size_t pivot = col;
        for (std::size_t r = col + 1; r < p; ++r)
          if (std::abs(m[r][col]) > std::abs(m[pivot][col]))
            pivot = r;
        if (!(std::abs(m[pivot][col]) > 1e-13))
          throw std::invalid_argument("weighted_least_squares: singular design");
        std::swap(m[col], m[pivot]);
        const double inv = 1.0 / m[col][col];
        for (auto &e : m[col])
          e *= inv;
        for (std::size_t r = 0; r < p; ++r)
          if (r != col)
            {
              const double f = m[r][col];
              for (std::size_t c = 0; c < 2 * p; ++c)
                m[r][c] -= f * m[col][c];
            }
      }
    LinearFit fit;
    fit.covariance.assign(p, std::vector<double>(p, 0.0));
    fit.parameters.assign(p, 0.0);
    for (std::size_t k = 0; k < p; ++k)
      for (std::size_t l = 0; l < p; ++l)
        fit.covariance[k][l] = m[k][p + l] * scale[k] * scale[l];
    for (std::size_t k = 0; k < p; ++k)
      for (std::size_t l = 0; l < p; ++l)
        fit.parameters[k] += fit.covariance[k][l] * v[l];
    for (std::size_t i = 0; i < n; ++i)
      {
        double model = 0;
        for (std::size_t k = 0; k < p; ++k)
          model += design[i][k] * fit.parameters[k];
        const double r = (y[i] - model) / sigma[i];
        fit.chi_squared += r * r;
      }
    fit.dof = n - p;
    return fit;
  }

  Extrapolation extrapolate_in_inverse_size(const std::vector<double> &sizes,
                                            const std::vector<double> &means,
                                            const std::vector<double> &errors,
                                            const bool quadratic)
  {
    std::vector<std::vector<double>> design;
    for (const double l : sizes)
      {
        if (!(l > 0.0))
          throw std::invalid_argument("extrapolate_in_inverse_size: sizes must be positive");
        design.push_back(quadratic ? std::vector<double>{1.0, 1.0 / l, 1.0 / (l * l)}
                                   : std::vector<double>{1.0, 1.0 / l});
      }
    const LinearFit fit = weighted_least_squares(design, means, errors);
    Extrapolation   e;
    e.quadratic        = quadratic;
    e.n_infinity       = fit.parameters[0];
    e.n_infinity_error = std::sqrt(fit.covariance[0][0]);
    e.c                = fit.parameters[1];
    e.c_error          = std::sqrt(fit.covariance[1][1]);
    if (quadratic)
      {
        e.d       = fit.parameters[2];
        e.d_error = std::sqrt(fit.covariance[2][2]);
      }
    e.chi_squared = fit.chi_squared;
    e.dof         = fit.dof;
    return e;
  }

  bool extrapolations_agree(const Extrapolation &a, const Extrapolation &b, const double confidence)
  {
    const double z = normal_quantile(0.5 + confidence / 2);
    return std::abs(a.n_infinity - b.n_infinity) <=
           z * std::hypot(a.n_infinity_error, b.n_infinity_error);
  }

  TailFit lifshitz_fit(const std::vector<GridValue> &ids, const double e0,
                       const unsigned int dimension, const double cell_volume,
                       std::vector<double> window, const double fraction, const double confidence,
                       const TailFitLimits &limits)
  {
    TailFit fit;
    fit.expected_slope = -0.5 * double(dimension);
    if (window.empty())
      {
        // Automatic: from the first energy above E0 with states to the first
        // where the IDS per cell reaches the fraction (or the last complete point).
        double lo = std::numeric_limits<double>::quiet_NaN(), hi = lo;
        for (const auto &g : ids)
          {
            if (!g.complete || !(g.energy > e0))
              continue;
            if (std::isnan(lo) && g.mean > 0.0)
              lo = g.energy;
            hi = g.energy;
            if (g.mean * cell_volume >= fraction)
              break;
          }
        if (std::isnan(lo))
          {
            fit.reason = "no complete grid point above E0 has any state: the computed spectra do "
                         "not reach into the tail";
            return fit;
          }
        window = {lo, hi};
      }
    fit.window_low  = window[0];
    fit.window_high = window[1];

    std::vector<double> x, y, sigma;
    for (const auto &g : ids)
      {
        if (g.energy < window[0] || g.energy > window[1] || !(g.energy > e0) || !g.complete)
          continue;
        const double n  = g.mean * cell_volume;
        const double sn = g.standard_error * cell_volume;
        // A point resting on a handful of states has a standard error that is
        // itself too noisy to weight by (common practice, no source).
        if (!(n > 0.0 && n < 1.0) || !(sn > 0.0) || g.states_below < limits.min_points_states)
          continue;
        if (g.weighted && !(g.effective_sample_size >= limits.min_point_effective_sample_size))
          continue;
        x.push_back(std::log(g.energy - e0));
        y.push_back(std::log(-std::log(n)));
        sigma.push_back(sn / (n * std::abs(std::log(n))));
        fit.states       = g.states_below;
        fit.realisations = g.realisations_with_states;
      }
    fit.points = x.size();
    std::ostringstream why;
    if (fit.points < limits.min_points)
      why << "only " << fit.points << " usable grid points in the window (need "
          << limits.min_points << ")";
    else if (fit.states < limits.min_states)
      why << "only " << fit.states << " states below the top of the window in all realisations "
          << "together (need " << limits.min_states << ")";
    else if (fit.realisations < limits.min_realisations)
      why << "only " << fit.realisations << " realisations have states in the window (need "
          << limits.min_realisations << ")";
    if (!why.str().empty())
      {
        fit.reason = why.str() + ": the data cannot resolve the Lifshitz tail; larger boxes, "
                                 "more realisations or a finer energy grid near E0 are needed";
        if (fit.points >= 3)
          (void)fit_line(x, y, sigma, confidence, fit); // reported, but not to be read as a result
        return fit;
      }
    if (const auto failed = fit_line(x, y, sigma, confidence, fit))
      {
        fit.reason = "the line cannot be fitted (" + *failed + "): the Lifshitz tail is not resolved";
        return fit;
      }
    fit.resolved   = true;
    fit.consistent = fit.slope_low <= fit.expected_slope && fit.expected_slope <= fit.slope_high;
    fit.reason     = fit.consistent
                       ? "effective slope consistent with the asymptotic -d/2"
                       : "effective slope differs from the asymptotic -d/2: the window is not "
                         "yet in the asymptotic regime or the box is too small";
    return fit;
  }

  TailFit urbach_fit(const std::vector<GridValue> &dos, const std::vector<double> &window,
                     const double broadening_width, const double confidence,
                     const TailFitLimits &limits)
  {
    TailFit fit;
    if (window.size() != 2 || !(window[0] < window[1]))
      throw std::invalid_argument("urbach_fit: the window needs two ascending energies");
    fit.window_low       = window[0];
    fit.window_high      = window[1];
    fit.reference_energy = window[1];
    std::vector<double> x, y, sigma;
    std::size_t         states_low = 0;
    bool                first      = true;
    for (const auto &g : dos)
      {
        if (g.energy < window[0] || g.energy > window[1] || !g.complete)
          continue;
        if (!(g.mean > 0.0) || !(g.standard_error > 0.0))
          continue;
        if (g.weighted && !(g.effective_sample_size >= limits.min_point_effective_sample_size))
          continue;
        if (first)
          states_low = g.states_below;
        first = false;
        x.push_back(g.energy - fit.reference_energy);
        y.push_back(std::log(g.mean));
        sigma.push_back(g.standard_error / g.mean);
        fit.states       = g.states_below - std::min(g.states_below, states_low);
        fit.realisations = g.realisations_with_states;
      }
    fit.points = x.size();
    if (fit.points < std::max<std::size_t>(3, limits.min_points))
      {
        fit.reason = "only " + std::to_string(fit.points) +
                     " usable grid points in the Urbach window: the data cannot resolve the tail";
        return fit;
      }
    if (const auto failed = fit_line(x, y, sigma, confidence, fit))
      {
        fit.reason = "the line cannot be fitted (" + *failed + "): the Urbach tail is not resolved";
        return fit;
      }
    const double inf  = std::numeric_limits<double>::infinity();
    fit.urbach_energy = fit.slope > 0.0 ? 1.0 / fit.slope : inf;
    fit.urbach_low    = fit.slope_high > 0.0 ? 1.0 / fit.slope_high : 0.0;
    fit.urbach_high   = fit.slope_low > 0.0 ? 1.0 / fit.slope_low : inf;
    if (!(fit.slope_low > 0.0))
      fit.reason = "the slope's interval reaches zero or below: no exponential edge resolved";
    else if (!(fit.urbach_energy > 2.0 * broadening_width))
      fit.reason = "the Urbach energy is not above twice the broadening width: the edge seen may "
                   "be the kernel's own; use a smaller Gaussian width";
    else
      fit.resolved = true;
    return fit;
  }
} // namespace alloyspec
