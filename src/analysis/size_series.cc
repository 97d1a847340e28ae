/** @file size_series.cc  Box-size series: fits in 1/L, their checks, tables and figures. */
#include <alloyspec/analysis/figures.h>
#include <alloyspec/analysis/report.h>
#include <alloyspec/analysis/size_series.h>
#include <alloyspec/analysis/spectrum_statistics.h>
#include <alloyspec/core/errors.h>
#include <alloyspec/core/format.h>
#include <alloyspec/io/manifest.h>
#include <alloyspec/io/results_store.h>

#include <algorithm>
#include <cmath>
#include <filesystem>
#include <limits>
#include <sstream>

namespace alloyspec
{
  namespace
  {
    constexpr double nan = std::numeric_limits<double>::quiet_NaN();

    std::string size_label(const double l) { return short_number(l, 4); }

    /** Colours of the sizes (small to large) and of the chosen energies. */
    const char *palette(const std::size_t k)
    {
      static const char *colours[] = {"#1b9e77", "#d95f02", "#7570b3", "#e7298a",
                                      "#66a61e", "#e6ab02", "#a6761d", "#666666"};
      return colours[k % 8];
    }
  } // namespace

  double count_resolution_error(const std::size_t realisations, const double volume)
  {
    return 1.0 / (double(std::max<std::size_t>(realisations, 1)) * volume);
  }

  SizeFit fit_size_series(const std::vector<SizePoint> &points)
  {
    SizeFit             fit;
    std::vector<double> l, m, e;
    std::string         left_out;
    for (const auto &p : points)
      {
        if (!p.complete)
          left_out += " L = " + size_label(p.size) + " incomplete there;";
        else if (!(p.mean > 0.0))
          left_out += " L = " + size_label(p.size) + " has no state at or below this energy;";
        else
          {
            l.push_back(p.size), m.push_back(p.mean);
            e.push_back(p.error > 0.0 ? p.error : count_resolution_error(p.realisations, p.volume));
          }
      }
    fit.sizes_used = l;
    if (l.size() < min_sizes_for_extrapolation)
      {
        fit.reason = std::to_string(l.size()) + " usable box size(s), the fit needs " +
                     std::to_string(min_sizes_for_extrapolation);
        if (!left_out.empty())
          {
            left_out.pop_back();
            fit.reason += ":" + left_out;
          }
        return fit;
      }
    fit.result     = extrapolate_in_inverse_size(l, m, e);
    fit.fitted     = true;
    fit.consistent = true;
    return fit;
  }

  void check_against_bracket(SizeFit &fit, const double lower, const double lower_error,
                             const double upper, const double upper_error, const double confidence)
  {
    if (!fit.fitted)
      return;
    // The estimate itself must be a possible IDS: a negative value, or one
    // outside the bracket, is flagged even when its interval reaches back in.
    // The intervals are quoted so that a reader can judge how far off it is.
    const double z  = normal_quantile(0.5 + confidence / 2);
    const double n  = fit.result.n_infinity;
    const double dn = z * fit.result.n_infinity_error;
    const std::string interval = " (interval ±" + short_number(dn, 2) + ")";
    std::vector<std::string> why;
    if (n < 0.0)
      why.push_back("N∞ = " + short_number(n) + interval + " is negative");
    if (std::isfinite(lower) && n < lower)
      why.push_back("N∞ = " + short_number(n) + " lies below the Dirichlet mean " +
                    short_number(lower) + " ± " + short_number(z * lower_error, 2) +
                    " of the largest box");
    if (std::isfinite(upper) && n > upper)
      why.push_back("N∞ = " + short_number(n) + " lies above the Neumann mean " +
                    short_number(upper) + " ± " + short_number(z * upper_error, 2) +
                    " of the largest box");
    if (why.empty())
      return;
    fit.consistent = false;
    fit.reason     = "inconsistent: ";
    for (std::size_t k = 0; k < why.size(); ++k)
      fit.reason += (k ? "; " : "") + why[k];
    fit.reason += " (the sizes are not yet in the 1/L regime at this energy)";
  }

  namespace
  {
    /** Per size: mean IDS rows of each boundary on the common grid. */
    struct SizeRows
    {
      double                                        size;
      double                                        volume;
      std::vector<std::vector<IdsAccumulator::Row>> rows; ///< [boundary][energy]
    };

    /** Up to @p count energies spread over those where @p usable is true (quantiles of the index). */
    std::vector<std::size_t> spread_indices(const std::vector<bool> &usable, const std::size_t count)
    {
      std::vector<std::size_t> candidates;
      for (std::size_t i = 0; i < usable.size(); ++i)
        if (usable[i])
          candidates.push_back(i);
      std::vector<std::size_t> chosen;
      if (candidates.empty())
        return chosen;
      const std::size_t k = std::min(count, candidates.size());
      for (std::size_t j = 0; j < k; ++j)
        {
          const std::size_t at = k == 1 ? candidates.size() / 2 :
                                          (j * (candidates.size() - 1)) / (k - 1);
          if (chosen.empty() || chosen.back() != candidates[at])
            chosen.push_back(candidates[at]);
        }
      return chosen;
    }

    std::string unit_suffix(const AnalysisInput &in)
    {
      return in.energy_column.rfind("energy_", 0) == 0 ? in.energy_column.substr(7) : "";
    }

    /** "E = 0.5 eV" */
    std::string energy_text(const AnalysisInput &in, const double e)
    {
      const std::string unit = unit_suffix(in);
      return "E = " + short_number(e) + (unit.empty() ? "" : " " + unit);
    }
  } // namespace

  std::vector<std::string> write_size_series(const std::string                &output_dir,
                                             const std::vector<AnalysisInput> &studies,
                                             const AnalysisSettings           &settings)
  {
    if (studies.size() < 2)
      throw InputError("summarise: need at least two studies (box sizes) to form a series");
    for (const auto &s : studies)
      if (s.energies != studies[0].energies || s.dimension != studies[0].dimension ||
          !(s.volume > 0.0) || !(s.cell_size > 0.0))
        throw InputError("summarise: all studies must share the energy grid and the dimension "
                         "and have a positive volume and cell size");
    const AnalysisInput &first    = studies[0];
    const auto          &energies = first.energies;
    const double         d        = double(first.dimension);
    std::filesystem::create_directories(output_dir);
    std::vector<std::string> warnings;

    // Sizes in increasing order, each with its rows.
    std::vector<SizeRows> series;
    std::size_t           largest_study = 0;
    for (std::size_t k = 0; k < studies.size(); ++k)
      {
        const auto &s = studies[k];
        // L from the volume; a whole number of cells is written as one (4, not 3.9999999999999996).
        double l = std::pow(s.volume / std::pow(s.cell_size, d), 1.0 / d);
        if (std::abs(l - std::round(l)) < 1e-9 * l)
          l = std::round(l);
        SizeRows sr{l, s.volume, {}};
        for (const auto &bc : first.boundaries)
          {
            IdsAccumulator acc(energies, s.volume);
            for (const auto &r : s.records)
              if (r.boundary == bc)
                acc.add(r.eigenvalues, r.complete_up_to, r.log_weight);
            sr.rows.push_back(acc.rows());
          }
        if (studies[k].volume > studies[largest_study].volume)
          largest_study = k;
        series.push_back(std::move(sr));
      }
    std::sort(series.begin(), series.end(),
              [](const SizeRows &a, const SizeRows &b) { return a.size < b.size; });
    const SizeRows &largest = series.back();
    const auto     &bcs     = first.boundaries;
    const auto      index   = [&](const char *name) {
      const auto it = std::find(bcs.begin(), bcs.end(), name);
      return it == bcs.end() ? -1 : int(it - bcs.begin());
    };
    const int di = index("dirichlet"), ni = index("neumann");
    if (series.size() < min_sizes_for_extrapolation)
      warnings.push_back("a box-size series of " + std::to_string(series.size()) +
                         " sizes: the fit N_L = N∞ + c/L needs at least " +
                         std::to_string(min_sizes_for_extrapolation) +
                         " (two parameters and one degree of freedom to test the 1/L form); "
                         "extrapolation.csv holds no fit, the IDS of every size and the bracket "
                         "widths are written");

    // Fits per boundary and energy, then the bracket check against the largest box.
    std::vector<std::vector<SizeFit>> fits(bcs.size(), std::vector<SizeFit>(energies.size()));
    for (std::size_t b = 0; b < bcs.size(); ++b)
      for (std::size_t i = 0; i < energies.size(); ++i)
        {
          std::vector<SizePoint> points;
          for (const auto &sr : series)
            {
              const auto &row = sr.rows[b][i];
              points.push_back({sr.size, row.mean, row.standard_error,
                                row.complete && row.n_realisations > 0, row.n_realisations,
                                sr.volume});
            }
          fits[b][i] = fit_size_series(points);
          const auto side = [&](const int k, double &mean, double &error) {
            mean = error = nan;
            if (k >= 0 && largest.rows[k][i].complete)
              mean = largest.rows[k][i].mean, error = largest.rows[k][i].standard_error;
          };
          double lo, lo_e, hi, hi_e;
          side(di, lo, lo_e);
          side(ni, hi, hi_e);
          check_against_bracket(fits[b][i], lo, lo_e, hi, hi_e, settings.confidence_level);
        }

    // extrapolation.csv and extrapolation.json.
    std::ostringstream csv;
    csv << "energy";
    for (const auto &bc : bcs)
      csv << ",n_infinity_" << bc << ",stderr_" << bc << ",c_" << bc << ",c_stderr_" << bc
          << ",chi_squared_" << bc << ",dof_" << bc << ",sizes_used_" << bc << ",consistent_"
          << bc;
    csv << ",agree\n";
    Json reasons = Json::array();
    std::size_t compared = 0, agreeing = 0, fitted_consistent = 0, fitted_any = 0;
    for (std::size_t i = 0; i < energies.size(); ++i)
      {
        csv << csv_number(energies[i]);
        Json entry;
        entry["energy"] = json_number(energies[i]);
        for (std::size_t b = 0; b < bcs.size(); ++b)
          {
            const auto &f = fits[b][i];
            const auto  v = [&](const double x) { return csv_number(f.fitted ? x : nan); };
            csv << ',' << v(f.result.n_infinity) << ',' << v(f.result.n_infinity_error) << ','
                << v(f.result.c) << ',' << v(f.result.c_error) << ',' << v(f.result.chi_squared)
                << ',' << v(double(f.result.dof)) << ',' << f.sizes_used.size() << ','
                << (f.fitted ? (f.consistent ? "1" : "0") : missing_marker);
            fitted_any += f.fitted;
            fitted_consistent += f.fitted && f.consistent;
            if (!f.reason.empty())
              entry[bcs[b]] = f.reason;
          }
        csv << ',';
        if (di >= 0 && ni >= 0 && fits[di][i].consistent && fits[ni][i].consistent)
          {
            const bool agree = extrapolations_agree(fits[di][i].result, fits[ni][i].result,
                                                    settings.confidence_level);
            ++compared, agreeing += agree;
            csv << (agree ? 1 : 0);
          }
        else
          csv << missing_marker;
        csv << '\n';
        if (entry.size() > 1)
          reasons.push_back(entry);
      }
    const AnalysisInput &big = studies[largest_study];
    ResultsStore::write_file_in(output_dir, "extrapolation.csv", with_energy_columns(csv.str(), big));
    {
      Json j                    = manifest_header("summarise (box-size series)");
      j["sizes"]                = Json::array();
      for (const auto &sr : series)
        j["sizes"].push_back(sr.size);
      j["minimum_sizes_for_fit"] = min_sizes_for_extrapolation;
      j["model"]                 = "N_L(E) = N_infinity(E) + c(E)/L, weighted least squares";
      j["energy_unit"]           = big.energy_unit;
      j["missing_value"]         = "null";
      j["fits_consistent"]       = fitted_consistent;
      j["fits_made"]             = fitted_any;
      j["fits_possible"]         = energies.size() * bcs.size();
      j["skipped_or_flagged"]    = reasons;
      write_json_file(output_dir, "extrapolation.json", j);
    }

    // ids_by_size.csv and bracket_width.csv.
    {
      std::ostringstream ids, width;
      ids << "energy";
      width << "energy";
      for (const auto &sr : series)
        {
          const std::string l = "_L" + size_label(sr.size);
          for (const auto &bc : bcs)
            ids << ",ids_" << bc << l << ",stderr_" << bc << l;
          if (di >= 0 && ni >= 0)
            width << ",width" << l << ",width_stderr" << l;
        }
      ids << '\n';
      width << '\n';
      for (std::size_t i = 0; i < energies.size(); ++i)
        {
          ids << csv_number(energies[i]);
          width << csv_number(energies[i]);
          for (const auto &sr : series)
            {
              for (std::size_t b = 0; b < bcs.size(); ++b)
                {
                  const auto &r = sr.rows[b][i];
                  ids << ',' << csv_number(r.complete ? r.mean : nan) << ','
                      << csv_number(r.complete ? r.standard_error : nan);
                }
              if (di >= 0 && ni >= 0)
                {
                  const auto &rd = sr.rows[di][i], &rn = sr.rows[ni][i];
                  const bool  ok = rd.complete && rn.complete;
                  width << ',' << csv_number(ok ? rn.mean - rd.mean : nan) << ','
                        << csv_number(ok ? std::hypot(rd.standard_error, rn.standard_error) : nan);
                }
            }
          ids << '\n';
          width << '\n';
        }
      ResultsStore::write_file_in(output_dir, "ids_by_size.csv", with_energy_columns(ids.str(), big));
      if (di >= 0 && ni >= 0)
        ResultsStore::write_file_in(output_dir, "bracket_width.csv",
                                    with_energy_columns(width.str(), big));
    }

    // Figures of the series.
    ReportContent report;
    report.title = "alloyspec: box-size series of " + std::to_string(series.size()) + " sizes";
    FigureMaker maker(output_dir + "/figures", settings.figure_formats, big.energy_unit);
    const std::string ids_unit = density_unit(big, false);
    maker.set_density_units(ids_unit, density_unit(big, true));
    {
      // Overlay of the IDS of every size: Dirichlet solid, Neumann dashed.
      std::ostringstream data, plot;
      bool               any = false;
      for (std::size_t i = 0; i < energies.size(); ++i)
        {
          data << csv_number(energies[i]);
          for (const auto &sr : series)
            for (std::size_t b = 0; b < bcs.size(); ++b)
              {
                const auto &r = sr.rows[b][i];
                any |= r.complete;
                data << ' ' << csv_number(r.complete ? r.mean : nan);
              }
          data << '\n';
        }
      plot << "set xlabel " << gnuplot_string(maker.energy_label()) << "\n"
           << "set ylabel " << gnuplot_string("IDS N_L(E) (" + ids_unit + ")") << "\n"
           << "plot ";
      for (std::size_t k = 0; k < series.size(); ++k)
        for (std::size_t b = 0; b < bcs.size(); ++b)
          plot << (k + b ? ", \\\n     " : "") << "data using 1:" << 2 + k * bcs.size() + b
               << " with lines lw 2 dt " << (bcs[b] == "dirichlet" ? 1 : bcs[b] == "neumann" ? 2 : 3)
               << " lc rgb '" << palette(k) << "' title "
               << gnuplot_string("L = " + size_label(series[k].size) + ", " + legend_name(bcs[b]));
      plot << "\n";
      if (any)
        report.figures.push_back(maker.make(
          "ids_by_size", "IDS of every box size",
          "Mean IDS of each box size (solid: Dirichlet, dashed: Neumann; one colour per size). "
          "Dirichlet rises and Neumann falls towards the infinite-volume IDS as L grows. Steps and "
          "plateaus in small boxes are box-quantisation structure, not features of the material.",
          data.str(), plot.str()));
    }
    {
      // N_L against 1/L at a few energies, with the fitted lines.
      std::vector<bool> usable(energies.size(), false);
      for (std::size_t i = 0; i < energies.size(); ++i)
        for (std::size_t b = 0; b < bcs.size(); ++b)
          usable[i] = usable[i] || fits[b][i].fitted;
      if (std::none_of(usable.begin(), usable.end(), [](bool u) { return u; }))
        for (std::size_t i = 0; i < energies.size(); ++i)
          usable[i] = largest.rows[0][i].complete && largest.rows[0][i].mean > 0.0;
      const auto chosen = spread_indices(usable, 4);
      if (!chosen.empty())
        {
          std::ostringstream data, plot, caption;
          for (const auto &sr : series)
            {
              data << csv_number(1.0 / sr.size);
              for (const std::size_t i : chosen)
                for (std::size_t b = 0; b < bcs.size(); ++b)
                  {
                    const auto &r  = sr.rows[b][i];
                    const bool  ok = r.complete;
                    data << ' ' << csv_number(ok ? r.mean : nan) << ' '
                         << csv_number(ok ? r.standard_error : nan);
                  }
              data << '\n';
            }
          plot << "set xlabel '1/L  (L: cells per direction)'\n"
               << "set ylabel " << gnuplot_string("N_L(E) (" + ids_unit + ")") << "\n"
               << "set xrange [0:" << csv_number(1.1 / series.front().size) << "]\n"
               << "set key outside right top vertical samplen 1.5 spacing 1.0\n";
          std::size_t column = 2, f = 0;
          std::string lines;
          for (std::size_t c = 0; c < chosen.size(); ++c)
            for (std::size_t b = 0; b < bcs.size(); ++b, column += 2)
              {
                const auto &fit   = fits[b][chosen[c]];
                const auto  style = bcs[b] == "dirichlet" ? 7 : 6;
                lines += std::string(lines.empty() ? "" : ", \\\n     ") + "data using 1:" +
                         std::to_string(column) + ":" + std::to_string(column + 1) +
                         " with yerrorbars pt " + std::to_string(style) + " ps 1 lc rgb '" +
                         palette(c) + "' title " +
                         gnuplot_string(energy_text(big, energies[chosen[c]]) + ", " + legend_name(bcs[b]));
                if (fit.fitted)
                  {
                    plot << "f" << f << "(x) = " << csv_number(fit.result.n_infinity) << " + "
                         << csv_number(fit.result.c) << "*x\n";
                    lines += ", \\\n     f" + std::to_string(f) + "(x) with lines lw 1.5 dt " +
                             (fit.consistent ? "1" : "3") + " lc rgb '" +
                             (fit.consistent ? std::string(palette(c)) : std::string("#999999")) +
                             "' notitle";
                    ++f;
                  }
              }
          plot << "plot " << lines << "\n";
          caption << "Mean IDS of each box size against 1/L at " << chosen.size()
                  << " energies (filled circles: Dirichlet, open: Neumann), with the fitted lines "
                     "N∞ + c/L; their value at 1/L = 0 is N∞. Grey dotted lines are fits flagged "
                     "inconsistent (N∞ negative or outside the bracket of the largest box).";
          if (f == 0)
            caption << " No fit is drawn: "
                    << (series.size() < min_sizes_for_extrapolation ?
                          "the series has fewer than " +
                            std::to_string(min_sizes_for_extrapolation) + " sizes." :
                          "no energy had enough usable sizes (see extrapolation.json).");
          report.figures.push_back(maker.make("size_fits", "IDS against 1/L",
                                              caption.str(), data.str(), plot.str()));
        }
    }
    if (di >= 0 && ni >= 0)
      {
        // Bracket width against L at a few energies, log-log, with a 1/L guide.
        std::vector<bool> usable(energies.size(), false);
        for (std::size_t i = 0; i < energies.size(); ++i)
          {
            usable[i] = true;
            for (const auto &sr : series)
              usable[i] = usable[i] && sr.rows[di][i].complete && sr.rows[ni][i].complete &&
                          sr.rows[ni][i].mean - sr.rows[di][i].mean > 0.0;
          }
        const auto chosen = spread_indices(usable, 4);
        if (!chosen.empty())
          {
            std::ostringstream data, plot;
            for (const auto &sr : series)
              {
                data << csv_number(sr.size);
                for (const std::size_t i : chosen)
                  {
                    const auto &rd = sr.rows[di][i], &rn = sr.rows[ni][i];
                    data << ' ' << csv_number(rn.mean - rd.mean) << ' '
                         << csv_number(std::hypot(rd.standard_error, rn.standard_error));
                  }
                data << '\n';
              }
            const std::size_t mid = chosen[chosen.size() / 2];
            const double      w0  = series.front().rows[ni][mid].mean -
                               series.front().rows[di][mid].mean;
            plot << "set xlabel 'L (cells per direction)'\n"
                 << "set ylabel " << gnuplot_string("N_L^N − N_L^D (" + ids_unit + ")") << "\n"
                 << "set xtics (";
            for (std::size_t k = 0; k < series.size(); ++k)
              plot << (k ? ", " : "") << csv_number(series[k].size);
            plot << ")\n"
                 << "set logscale xy\nset xrange [" << csv_number(series.front().size * 0.85)
                 << ":" << csv_number(series.back().size * 1.15) << "]\n"
                 << "set key outside right top vertical samplen 1.5\nplot ";
            for (std::size_t c = 0; c < chosen.size(); ++c)
              plot << (c ? ", \\\n     " : "") << "data using 1:" << 2 + 2 * c << ":" << 3 + 2 * c
                   << " with yerrorlines pt 7 ps 0.8 lw 1.5 lc rgb '" << palette(c) << "' title "
                   << gnuplot_string(energy_text(big, energies[chosen[c]]));
            plot << ", \\\n     " << csv_number(w0 * series.front().size)
                 << "/x with lines dt 2 lc rgb 'black' title '∝ 1/L'\n";
            report.figures.push_back(maker.make(
              "bracket_width", "Width of the Dirichlet–Neumann bracket against L",
              "N_N − N_D of each box size at " + std::to_string(chosen.size()) +
                " energies (error bars: the two standard errors combined as if independent, "
                "which overstates them: both sides share the cell values). The dashed line falls "
                "like 1/L, the surface term; all widths are in bracket_width.csv.",
              data.str(), plot.str()));
          }
      }
    if (fitted_consistent > 0)
      {
        // N∞ where the fit is consistent, with its band, and the largest box's bracket.
        const double       z = normal_quantile(0.5 + settings.confidence_level / 2);
        std::ostringstream data, plot;
        for (std::size_t i = 0; i < energies.size(); ++i)
          {
            data << csv_number(energies[i]);
            for (std::size_t b = 0; b < bcs.size(); ++b)
              {
                const auto  &f  = fits[b][i];
                const bool   ok = f.fitted && f.consistent;
                const double m = f.result.n_infinity, e = z * f.result.n_infinity_error;
                data << ' ' << csv_number(ok ? m : nan) << ' ' << csv_number(ok ? m - e : nan) << ' '
                     << csv_number(ok ? m + e : nan) << ' '
                     << csv_number(f.fitted && !f.consistent ? m : nan) << ' '
                     << csv_number(largest.rows[b][i].complete ? largest.rows[b][i].mean : nan);
              }
            data << '\n';
          }
        plot << "set xlabel " << gnuplot_string(maker.energy_label()) << "\n"
             << "set ylabel " << gnuplot_string("N∞(E) (" + ids_unit + ")") << "\n"
             << "plot ";
        for (std::size_t b = 0; b < bcs.size(); ++b)
          {
            const std::size_t c   = 2 + 5 * b;
            const std::string col = bcs[b] == "dirichlet" ? "#1f5fa8" : bcs[b] == "neumann" ? "#c0392b" : "#2e8b57";
            plot << (b ? ", \\\n     " : "") << "data using 1:" << c + 1 << ":" << c + 2
                 << " with filledcurves fc rgb '" << col
                 << "' fs transparent solid 0.25 noborder notitle, \\\n     data using 1:" << c
                 << " with lines lw 2 lc rgb '" << col << "' title "
                 << gnuplot_string(legend_name(bcs[b]) + " → L = ∞") << ", \\\n     data using 1:" << c + 4
                 << " with lines lw 1 dt 3 lc rgb '" << col << "' title "
                 << gnuplot_string(legend_name(bcs[b]) + ", L = " + size_label(largest.size)) << ", \\\n     data using 1:" << c + 3
                 << " with points pt 2 ps 0.6 lc rgb '#999999' notitle";
          }
        plot << "\n";
        report.figures.push_back(maker.make(
          "extrapolation", "IDS extrapolated to infinite volume",
          "N∞ from the fit N_L = N∞ + c/L per energy and boundary condition (band: interval at "
          "confidence " + short_number(settings.confidence_level) +
            "), drawn only where the fit is consistent; grey crosses: fits flagged inconsistent. "
            "Dotted: the largest box's means, which bracket N∞.",
          data.str(), plot.str()));
      }

    // Report content of the series; the largest box's analysis follows.
    std::ostringstream list;
    for (std::size_t k = 0; k < series.size(); ++k)
      list << (k ? ", " : "") << size_label(series[k].size);
    report.key_numbers.push_back({"box sizes L (cells per direction)", list.str()});
    report.key_numbers.push_back(
      {"1/L fits", std::to_string(fitted_consistent) + " consistent of " +
                     std::to_string(energies.size() * bcs.size()) +
                     " (energy, boundary) pairs; at least " +
                     std::to_string(min_sizes_for_extrapolation) +
                     " usable sizes are needed; reasons in extrapolation.json"});
    report.key_numbers.push_back({"figures and tail fits below the series",
                                  "largest box, L = " + size_label(largest.size)});
    ReportTable table{"Box-size series at selected energies (N∞ ± standard error; reason where "
                      "there is no consistent fit)",
                      {"energy"},
                      {}};
    for (const auto &bc : bcs)
      table.header.push_back("N∞ " + bc);
    if (di >= 0 && ni >= 0)
      table.header.push_back("bracket width at L = " + size_label(largest.size));
    std::vector<bool> all_points(energies.size(), true);
    for (const std::size_t i : spread_indices(all_points, 8))
      {
        std::vector<std::string> row{short_number(energies[i])};
        for (std::size_t b = 0; b < bcs.size(); ++b)
          {
            const auto &f = fits[b][i];
            row.push_back(f.fitted && f.consistent ?
                            short_number(f.result.n_infinity) + " ± " +
                              short_number(f.result.n_infinity_error, 2) :
                            f.reason);
          }
        if (di >= 0 && ni >= 0)
          {
            const auto &rd = largest.rows[di][i], &rn = largest.rows[ni][i];
            row.push_back(rd.complete && rn.complete ? short_number(rn.mean - rd.mean) :
                                                       "incomplete");
          }
        table.rows.push_back(row);
      }
    report.tables.push_back(table);
    if (compared > 0)
      report.checks.push_back(
        {"Dirichlet and Neumann extrapolations agree (N∞ + c/L)", agreeing == compared,
         std::to_string(agreeing) + " of " + std::to_string(compared) +
           " energies agree within the interval at confidence " +
           short_number(settings.confidence_level) +
           " (treated as independent, which is conservative for common cell values)"});
    for (const auto &w : maker.warnings())
      warnings.push_back(w);
    auto rest = write_analysis(output_dir, big, settings, report);
    warnings.insert(warnings.end(), rest.begin(), rest.end());
    return warnings;
  }
} // namespace alloyspec
