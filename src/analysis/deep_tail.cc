/** @file deep_tail.cc  Lifshitz fits on the deep tail, deep_tail.json and the tilted study's report. */
#include <alloyspec/analysis/deep_tail.h>
#include <alloyspec/analysis/figures.h>
#include <alloyspec/analysis/report.h>
#include <alloyspec/analysis/tail_fits.h>
#include <alloyspec/core/format.h>
#include <alloyspec/io/manifest.h>
#include <alloyspec/io/results_store.h>

#include <boost/math/distributions/chi_squared.hpp>

#include <algorithm>
#include <cmath>
#include <filesystem>
#include <sstream>
#include <stdexcept>

namespace alloyspec
{
  namespace
  {
    constexpr double nan = std::numeric_limits<double>::quiet_NaN();

    /**
     * The profile of form B scans α over (0, 4]: beyond 4 no Lifshitz law of
     * d ≤ 3 (d/2 ≤ 1.5) is in question, and a step of 0.002 resolves intervals
     * far narrower than any the tail data give.
     */
    constexpr double profile_alpha_min = 0.002, profile_alpha_max = 4.0, profile_step = 0.002;

    /** A straight-line weighted fit with its slope interval (Student t, s² = max(1, χ²/ν)). */
    struct Line
    {
      bool        ok = false;
      double      intercept = nan, slope = nan, slope_error = nan, intercept_error = nan;
      double      chi_squared = nan;
      std::size_t dof         = 0;
    };

    Line fit_line(const std::vector<double> &x, const std::vector<double> &y,
                  const std::vector<double> &sigma)
    {
      Line line;
      std::vector<std::vector<double>> design;
      for (const double xi : x)
        design.push_back({1.0, xi});
      LinearFit fit;
      try
        {
          fit = weighted_least_squares(design, y, sigma);
        }
      catch (const std::invalid_argument &)
        {
          return line;
        }
      line.ok          = true;
      line.intercept   = fit.parameters[0];
      line.slope       = fit.parameters[1];
      line.chi_squared = fit.chi_squared;
      line.dof         = fit.dof;
      // Never narrower than the given errors imply; wider when the scatter says so.
      const double scale =
        fit.dof > 0 ? std::sqrt(std::max(1.0, fit.chi_squared / double(fit.dof))) : 1.0;
      line.slope_error     = std::sqrt(fit.covariance[1][1]) * scale;
      line.intercept_error = std::sqrt(fit.covariance[0][0]) * scale;
      return line;
    }

    double t_quantile(const double confidence, const std::size_t dof)
    {
      return dof > 0 ? student_t_quantile(0.5 + confidence / 2, unsigned(dof)) :
                       std::numeric_limits<double>::infinity();
    }

    /** Form A on @p points: α = −slope of ln(−ln n) against ln(E − E0). */
    Line form_a(const std::vector<DeepTailPoint> &points, const double e0)
    {
      std::vector<double> x, y, s;
      for (const auto &p : points)
        {
          x.push_back(std::log(p.energy - e0));
          y.push_back(std::log(-std::log(p.n)));
          s.push_back(p.standard_error / (p.n * std::abs(std::log(p.n))));
        }
      return fit_line(x, y, s);
    }

    /** Form B at exponent α: ln n against (E − E0)^(−α); slope −C. */
    Line form_b(const std::vector<DeepTailPoint> &points, const double e0, const double alpha)
    {
      std::vector<double> x, y, s;
      for (const auto &p : points)
        {
          x.push_back(std::pow(p.energy - e0, -alpha));
          y.push_back(std::log(p.n));
          s.push_back(p.standard_error / p.n);
        }
      return fit_line(x, y, s);
    }

    Json number_or_null(const double x) { return json_number(x); }

    std::string brief(const double x) { return short_number(x, 4); }

    std::string interval(const double x, const double low, const double high)
    {
      if (!std::isfinite(x))
        return "not fitted";
      return brief(x) + " [" + brief(low) + ", " + brief(high) + "]";
    }
  } // namespace

  std::vector<DeepTailPoint> deep_tail_points(const std::vector<IdsAccumulator::Row> &rows,
                                              const double e0, const double cell_volume,
                                              const double fraction, const DeepTailLimits &limits)
  {
    std::vector<DeepTailPoint> points;
    for (const auto &r : rows)
      {
        const double n = r.mean * cell_volume;
        if (!(r.energy > e0) || !r.complete || !(n > 0) || n > fraction || n >= 1 ||
            !(r.standard_error > 0) || r.effective_sample_size < limits.min_effective_sample_size)
          continue;
        points.push_back({r.energy, n, r.standard_error * cell_volume, r.effective_sample_size});
      }
    std::sort(points.begin(), points.end(),
              [](const DeepTailPoint &a, const DeepTailPoint &b) { return a.energy < b.energy; });
    return points;
  }

  DeepTailFit deep_tail_fit(const std::vector<IdsAccumulator::Row> &rows, const double e0,
                            const unsigned int dimension, const double cell_volume,
                            const double fraction, const double confidence,
                            const DeepTailLimits &limits)
  {
    DeepTailFit fit;
    fit.expected_exponent = 0.5 * double(dimension);
    const auto points     = deep_tail_points(rows, e0, cell_volume, fraction, limits);
    fit.points            = points.size();
    if (points.size() < limits.min_points)
      {
        fit.reason = std::to_string(points.size()) + " usable deep-tail points (need " +
                     std::to_string(limits.min_points) + " with E > E0, 0 < n ≤ " +
                     short_number(fraction) + " per cell, a complete count and an effective " +
                     "sample size ≥ " + short_number(limits.min_effective_sample_size) + ")";
        return fit;
      }
    fit.window_low  = points.front().energy;
    fit.window_high = points.back().energy;
    fit.n_low = fit.n_high = points.front().n;
    for (const auto &p : points)
      fit.n_low = std::min(fit.n_low, p.n), fit.n_high = std::max(fit.n_high, p.n);

    const double z = normal_quantile(0.5 + confidence / 2);
    const Line   a = form_a(points, e0);
    const Line   b = form_b(points, e0, fit.expected_exponent);
    if (!a.ok || !b.ok)
      {
        fit.reason = "singular least-squares design";
        return fit;
      }
    fit.fitted          = true;
    const double ta     = t_quantile(confidence, a.dof);
    fit.exponent_a      = -a.slope;
    fit.exponent_a_low  = -a.slope - ta * a.slope_error;
    fit.exponent_a_high = -a.slope + ta * a.slope_error;
    fit.chi_squared_a   = a.chi_squared;
    fit.dof_a           = a.dof;
    fit.constant_b       = -b.slope;
    fit.constant_b_error = b.slope_error;
    fit.intercept_b      = b.intercept;
    fit.chi_squared_b    = b.chi_squared;
    fit.dof_b            = b.dof;

    // Profile of form B in α.
    std::vector<double> alphas, chi2;
    for (double alpha = profile_alpha_min; alpha <= profile_alpha_max + 1e-12; alpha += profile_step)
      {
        const Line l = form_b(points, e0, alpha);
        alphas.push_back(alpha);
        chi2.push_back(l.ok ? l.chi_squared : std::numeric_limits<double>::infinity());
      }
    const std::size_t best = std::min_element(chi2.begin(), chi2.end()) - chi2.begin();
    if (std::isfinite(chi2[best]))
      {
        const std::size_t dof   = points.size() > 3 ? points.size() - 3 : 0;
        const double      scale = dof > 0 ? std::max(1.0, chi2[best] / double(dof)) : 1.0;
        const double      limit = chi2[best] + z * z * scale;
        std::size_t       lo = best, hi = best;
        while (lo > 0 && chi2[lo - 1] <= limit)
          --lo;
        while (hi + 1 < chi2.size() && chi2[hi + 1] <= limit)
          ++hi;
        fit.exponent_b      = alphas[best];
        fit.exponent_b_low  = alphas[lo];
        fit.exponent_b_high = alphas[hi];
        fit.exponent_b_open = lo == 0 || hi + 1 == chi2.size();
      }

    // Drift of the local exponent between the two halves of the window.
    if (points.size() >= 6)
      {
        const std::size_t half = (points.size() + 1) / 2;
        const Line        low  = form_a({points.begin(), points.begin() + half}, e0);
        const Line        high = form_a({points.begin() + half, points.end()}, e0);
        if (low.ok && high.ok)
          {
            fit.exponent_lower_half = -low.slope, fit.exponent_lower_half_error = low.slope_error;
            fit.exponent_upper_half = -high.slope, fit.exponent_upper_half_error = high.slope_error;
          }
      }

    // The criterion (deep_tail.h).
    auto &why = fit.not_asymptotic_because;
    const double d2 = fit.expected_exponent;
    if (!(fit.exponent_a_low <= d2 && d2 <= fit.exponent_a_high))
      why.push_back("form A: the interval of the exponent excludes d/2 = " + brief(d2));
    if (!std::isfinite(fit.exponent_b) || !(fit.exponent_b_low <= d2 && d2 <= fit.exponent_b_high))
      why.push_back("form B: the profile interval of the exponent excludes d/2 = " + brief(d2));
    if (!std::isfinite(fit.exponent_lower_half))
      why.push_back("the drift of the local exponent cannot be tested (fewer than 6 points)");
    else if (std::abs(fit.exponent_lower_half - fit.exponent_upper_half) >
             z * std::hypot(fit.exponent_lower_half_error, fit.exponent_upper_half_error))
      why.push_back("the local exponent drifts across the window (lower half " +
                    brief(fit.exponent_lower_half) + " ± " + brief(fit.exponent_lower_half_error) +
                    ", upper half " + brief(fit.exponent_upper_half) + " ± " +
                    brief(fit.exponent_upper_half_error) + ")");
    if (std::log(fit.n_high / fit.n_low) < limits.min_e_folds)
      why.push_back("n spans only " + brief(std::log(fit.n_high / fit.n_low)) +
                    " e-folds across the window (need " + brief(limits.min_e_folds) + ")");
    if (fit.dof_b > 0)
      {
        const boost::math::chi_squared_distribution<double> law(double(fit.dof_b));
        const double critical = boost::math::quantile(law, 0.5 + confidence / 2);
        if (fit.chi_squared_b > critical)
          why.push_back("form B at α = d/2: χ² = " + brief(fit.chi_squared_b) + " above " +
                        brief(critical) + " (the " + brief(0.5 + confidence / 2) +
                        " quantile of χ² with " + std::to_string(fit.dof_b) + " degrees of freedom)");
      }
    fit.asymptotic = why.empty();
    return fit;
  }

  std::vector<std::string> write_deep_tail(const std::string                                   &output_dir,
                                           const AnalysisInput                                 &in,
                                           const std::vector<std::vector<IdsAccumulator::Row>> &rows,
                                           const std::vector<WeightSummary>                    &weights,
                                           const AnalysisSettings &settings,
                                           ReportContent          *report_out)
  {
    const double cell_volume = std::pow(in.cell_size, double(in.dimension));
    const double fraction    = settings.lifshitz_fraction;
    const double confidence  = settings.confidence_level;
    std::vector<DeepTailFit> fits;
    for (const auto &r : rows)
      fits.push_back(deep_tail_fit(r, in.band_bottom, in.dimension, cell_volume, fraction, confidence));

    // deep_tail.json
    Json json = manifest_header("deep_tail");
    json["bottom_of_spectrum"] = json_number(in.band_bottom);
    json["dimension"]          = in.dimension;
    json["expected_exponent"]  = json_number(0.5 * in.dimension);
    json["confidence_level"]   = json_number(confidence);
    json["window_rule"] =
      "grid energies above E0 with a complete count, 0 < n <= analysis/lifshitz fraction (n = IDS "
      "per unit cell), a positive standard error and an effective sample size >= 10";
    json["not_asymptotic_when"] = {
      "form A interval of the exponent excludes d/2",
      "form B profile interval of the exponent excludes d/2",
      "the exponents of form A on the lower and upper halves of the window differ by more than "
      "z*sqrt(s1^2 + s2^2), or fewer than 6 points make that untestable",
      "n spans fewer than 2 e-folds across the window",
      "form B at d/2 has chi^2 above the (1 + c)/2 quantile of chi^2 with its degrees of freedom"};
    Json per_bc = Json::object();
    for (std::size_t b = 0; b < fits.size(); ++b)
      {
        const auto &f = fits[b];
        Json        j;
        j["fitted"] = f.fitted;
        j["reason"] = f.reason.empty() ? Json() : Json(f.reason);
        j["window"] = {number_or_null(f.window_low), number_or_null(f.window_high)};
        j["points"] = f.points;
        j["n_per_cell_range"] = {number_or_null(f.n_low), number_or_null(f.n_high)};
        j["log_log_form"] = {{"exponent", number_or_null(f.exponent_a)},
                             {"interval", {number_or_null(f.exponent_a_low), number_or_null(f.exponent_a_high)}},
                             {"chi_squared", number_or_null(f.chi_squared_a)},
                             {"dof", f.dof_a}};
        j["power_form_at_half_d"] = {{"constant", number_or_null(f.constant_b)},
                                     {"constant_error", number_or_null(f.constant_b_error)},
                                     {"intercept", number_or_null(f.intercept_b)},
                                     {"chi_squared", number_or_null(f.chi_squared_b)},
                                     {"dof", f.dof_b}};
        j["power_form_free_exponent"] = {
          {"exponent", number_or_null(f.exponent_b)},
          {"interval", {number_or_null(f.exponent_b_low), number_or_null(f.exponent_b_high)}},
          {"interval_reaches_scan_end", f.exponent_b_open}};
        j["local_exponent_halves"] = {
          {"lower", number_or_null(f.exponent_lower_half)},
          {"lower_error", number_or_null(f.exponent_lower_half_error)},
          {"upper", number_or_null(f.exponent_upper_half)},
          {"upper_error", number_or_null(f.exponent_upper_half_error)}};
        j["asymptotic"]             = f.fitted && f.asymptotic;
        j["not_asymptotic_because"] = f.not_asymptotic_because;
        if (b < weights.size())
          j["weights"] = {{"realisations", weights[b].realisations},
                          {"effective_sample_size", json_number(weights[b].effective_sample_size)},
                          {"mean_weight", json_number(weights[b].mean_weight)}};
        per_bc[in.boundaries[b]] = j;
      }
    json["boundaries"] = per_bc;
    std::filesystem::create_directories(output_dir);
    write_json_file(output_dir, "deep_tail.json", json);

    FigureMaker maker(output_dir + "/figures", settings.figure_formats, in.energy_unit);
    maker.set_density_units(density_unit(in, false), density_unit(in, true));
    Figure figure = deep_tail_figure(maker, in.boundaries, rows, fits, in.band_bottom, cell_volume,
                                     in.dimension, confidence);
    std::vector<std::string> warnings = maker.warnings();
    if (!report_out)
      return warnings;

    ReportContent &report = *report_out;
    report.title          = "alloyspec analysis (tilted sampling: importance-weighted)";
    report.key_numbers.push_back({"confidence level", brief(confidence)});
    const double z = normal_quantile(0.5 + confidence / 2);
    for (std::size_t b = 0; b < rows.size(); ++b)
      {
        const std::string &bc = in.boundaries[b];
        if (b < weights.size())
          report.key_numbers.push_back(
            {"effective sample size of the weights (" + bc + ")",
             brief(weights[b].effective_sample_size) + " of " +
               std::to_string(weights[b].realisations) + " realisations, mean weight " +
               brief(weights[b].mean_weight)});
        // The deepest point resolved: the smallest positive N with a complete
        // count and enough effective realisations for its normal interval.
        const IdsAccumulator::Row *deepest = nullptr;
        const DeepTailLimits       limits;
        for (const auto &r : rows[b])
          if (r.complete && r.mean > 0 &&
              r.effective_sample_size >= limits.min_effective_sample_size &&
              (!deepest || r.mean < deepest->mean))
            deepest = &r;
        if (deepest)
          report.key_numbers.push_back(
            {"smallest N resolved, effective sample size ≥ " +
               brief(limits.min_effective_sample_size) + " (" + bc + ")",
             brief(deepest->mean) + " [" + brief(std::max(0.0, deepest->mean - z * deepest->standard_error)) +
               ", " + brief(deepest->mean + z * deepest->standard_error) + "] at E = " +
               brief(deepest->energy) + ", effective sample size " +
               brief(deepest->effective_sample_size)});
      }

    ReportTable tail{"Tail table (tail.csv): N per unit volume, the normal interval at the "
                     "confidence level, the effective sample size behind each value",
                     {"energy"},
                     {}};
    for (const auto &bc : in.boundaries)
      for (const std::string c : {"N ", "interval ", "ESS ", "ln N "})
        tail.header.push_back(c + bc);
    const std::size_t n_e = rows.empty() ? 0 : rows.front().size();
    for (std::size_t i = 0; i < n_e; ++i)
      {
        std::vector<std::string> row{brief(rows.front()[i].energy)};
        for (const auto &r : rows)
          {
            const auto &x = r[i];
            row.push_back(brief(x.mean) + (x.complete ? "" : " *"));
            row.push_back("[" + brief(std::max(0.0, x.mean - z * x.standard_error)) + ", " +
                          brief(x.mean + z * x.standard_error) + "]");
            row.push_back(brief(x.effective_sample_size));
            row.push_back(x.mean > 0 ? brief(std::log(x.mean)) : "nan");
          }
        tail.rows.push_back(row);
      }
    report.tables.push_back(tail);

    ReportTable table{"Lifshitz fits on the deep tail (deep_tail.json); exponent α of "
                      "ln n ≈ −C (E − E0)^(−α), expected d/2 = " + brief(0.5 * in.dimension),
                      {"boundary", "window", "points", "n per cell", "α from ln(−ln n) vs ln(E−E0)",
                       "α from ln n vs (E−E0)^(−α)", "C at α = d/2", "asymptotic?"},
                      {}};
    for (std::size_t b = 0; b < fits.size(); ++b)
      {
        const auto &f = fits[b];
        if (!f.fitted)
          {
            table.rows.push_back({in.boundaries[b], "", std::to_string(f.points), "", "not fitted",
                                  "not fitted", "", "no: " + f.reason});
            continue;
          }
        std::string verdict = f.asymptotic ? "consistent with d/2" : "NOT ASYMPTOTIC:";
        for (const auto &w : f.not_asymptotic_because)
          verdict += " " + w + ";";
        table.rows.push_back(
          {in.boundaries[b], "[" + brief(f.window_low) + ", " + brief(f.window_high) + "]",
           std::to_string(f.points), "[" + brief(f.n_low) + ", " + brief(f.n_high) + "]",
           interval(f.exponent_a, f.exponent_a_low, f.exponent_a_high),
           interval(f.exponent_b, f.exponent_b_low, f.exponent_b_high) +
             (f.exponent_b_open ? " (open: reaches the scan's end)" : ""),
           brief(f.constant_b) + " ± " + brief(f.constant_b_error) + ", χ²/ν = " +
             brief(f.chi_squared_b) + "/" + std::to_string(f.dof_b),
           verdict});
      }
    report.tables.push_back(table);
    report.figures.push_back(figure);
    report.notes.push_back(
      "Estimator: the unbiased importance-sampling mean (1/R) Σ w_r N_r(E), its standard error "
      "the sample standard deviation of w_r N_r over √R; the interval is the normal one, cut at 0. "
      "Read the effective sample sizes before the numbers: a value resting on few effective "
      "realisations has an unreliable interval.");
    report.notes.push_back(
      "Fit points: complete counts with E > E0, 0 < n ≤ " + brief(fraction) +
      " per cell (analysis/lifshitz fraction) and an effective sample size of at least 10. "
      "A fit is called not asymptotic when an interval of the exponent excludes d/2, when the "
      "local exponent of the lower and upper halves of the window differ beyond their errors "
      "(or there are fewer than 6 points to tell), when n spans fewer than 2 e-folds, or when "
      "the form at d/2 fails its χ² test. Neighbouring energies share realisations, so their "
      "errors are correlated and the intervals are approximate.");
    report.notes.push_back(
      "Every table and figure of this report is importance-weighted with the same estimator: "
      "the IDS, its bootstrap band (realisations resampled with their weights), the DOS, the "
      "local trace and the tail fits are unbiased means (1/R) Σ w_r X_r; the level-spacing "
      "ratios and IPRs per bin are ratios Σ w S / Σ w C of two such means (consistent), with "
      "realisations as the independent units of their standard errors. Tail-fit points need an "
      "effective sample size of at least 10.");
    return warnings;
  }
} // namespace alloyspec
