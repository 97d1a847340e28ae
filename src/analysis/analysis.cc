/** @file analysis.cc  From stored spectra to tables, tail fits, figures and report.html. */
#include <alloyspec/analysis/analysis.h>
#include <alloyspec/core/errors.h>
#include <alloyspec/core/format.h>
#include <alloyspec/io/manifest.h>
#include <alloyspec/analysis/figures.h>
#include <alloyspec/analysis/report.h>
#include <alloyspec/analysis/spectrum_statistics.h>
#include <alloyspec/analysis/tail_fits.h>

#include <algorithm>
#include <cmath>
#include <filesystem>
#include <fstream>
#include <limits>
#include <map>
#include <set>
#include <sstream>

namespace alloyspec
{
  namespace
  {
    constexpr double nan = std::numeric_limits<double>::quiet_NaN();
    /** Rows of the eigenvalue table of a fixed potential, per boundary condition. */
    constexpr std::size_t max_eigenvalue_rows = 20;

    /** Short form for tables of the report. */
    std::string brief(const double x)
    {
      if (std::isnan(x))
        return "–";
      if (std::isinf(x))
        return x > 0 ? "∞" : "−∞";
      std::ostringstream s;
      s.precision(4);
      s << x;
      return s.str();
    }

    /** Writes @p content to @p path atomically (temporary file, then rename). */
    void write_text(const std::string &path, const std::string &content)
    {
      const std::filesystem::path p(path);
      ResultsStore::write_file_in(p.parent_path().string(), p.filename().string(), content);
    }

    /** Everything computed for one boundary condition. */
    struct BoundaryAnalysis
    {
      std::string              name;
      CountingSamples          samples;
      std::vector<IntervalRow> band, lorentzian, gaussian;
      std::vector<GridValue>   ids, dos;
      TailFit                  lifshitz, urbach;
      std::vector<BinRow>      ratios, ipr;
      std::size_t              realisations = 0;
    };

    BoundaryAnalysis analyse_boundary(const AnalysisInput &in, const std::string &bc,
                                      const AnalysisSettings &s)
    {
      BoundaryAnalysis a;
      a.name        = bc;
      const double cell_volume = std::pow(in.cell_size, double(in.dimension));
      a.samples      = counting_samples(in.records, bc, in.energies, in.volume);
      a.realisations = a.samples.counts.size();
      a.band = bootstrap_mean_interval(a.samples, s.bootstrap_samples, s.confidence_level,
                                       s.bootstrap_seed);
      a.lorentzian = density_of_states(in.records, bc, in.energies, in.volume,
                                       Broadening::lorentzian, s.lorentzian_width);
      a.gaussian   = density_of_states(in.records, bc, in.energies, in.volume,
                                       Broadening::gaussian, s.gaussian_width);
      for (std::size_t i = 0; i < in.energies.size(); ++i)
        {
          const auto &r = a.band[i];
          a.ids.push_back({r.energy, r.mean, r.standard_error, r.complete,
                           a.samples.states_below[i], a.samples.realisations_with_states[i],
                           a.samples.weighted, r.effective_sample_size});
          const auto &g = a.gaussian[i];
          a.dos.push_back({g.energy, g.mean, g.standard_error, g.complete,
                           a.samples.states_below[i], a.samples.realisations_with_states[i],
                           a.samples.weighted, g.effective_sample_size});
        }
      a.lifshitz = lifshitz_fit(a.ids, in.band_bottom, in.dimension, cell_volume,
                                s.lifshitz_window, s.lifshitz_fraction, s.confidence_level);
      std::vector<double> window = s.urbach_window;
      if (window.empty() && in.mean_potential > in.band_bottom)
        window = {in.band_bottom, in.mean_potential};
      if (window.empty())
        a.urbach.reason = "no automatic Urbach window: the mean potential is not above E0";
      else
        a.urbach = urbach_fit(a.dos, window, s.gaussian_width, s.confidence_level);
      const double lo = in.energies.front(), hi = in.energies.back();
      if (hi > lo)
        {
          a.ratios = spacing_ratio_bins(in.records, bc, lo, hi, s.bin_width);
          a.ipr    = ipr_bins(in.records, bc, lo, hi, s.bin_width);
        }
      return a;
    }

    /** @p x where the row is complete, the missing marker where it is not (never an under-count). */
    std::string if_complete(const bool complete, const double x)
    {
      return csv_number(complete ? x : std::numeric_limits<double>::quiet_NaN());
    }

    std::string ids_band_csv(const std::vector<BoundaryAnalysis> &all,
                             const std::vector<double> &energies)
    {
      std::ostringstream csv;
      csv << "energy";
      for (const auto &a : all)
        csv << ",ids_" << a.name << ",lower_" << a.name << ",upper_" << a.name << ",complete_"
            << a.name;
      csv << '\n';
      for (std::size_t i = 0; i < energies.size(); ++i)
        {
          csv << csv_number(energies[i]);
          for (const auto &a : all)
            {
              const auto &r = a.band[i];
              csv << ',' << if_complete(r.complete, r.mean) << ','
                  << if_complete(r.complete, r.lower) << ',' << if_complete(r.complete, r.upper)
                  << ',' << (r.complete ? 1 : 0);
            }
          csv << '\n';
        }
      return csv.str();
    }

    std::string dos_csv(const std::vector<BoundaryAnalysis> &all, const std::vector<double> &energies)
    {
      std::ostringstream csv;
      csv << "energy";
      for (const auto &a : all)
        for (const char *k : {"lorentzian", "gaussian"})
          csv << ',' << k << '_' << a.name << ',' << k << "_stderr_" << a.name << ',' << k
              << "_complete_" << a.name;
      csv << '\n';
      for (std::size_t i = 0; i < energies.size(); ++i)
        {
          csv << csv_number(energies[i]);
          for (const auto &a : all)
            for (const auto *rows : {&a.lorentzian, &a.gaussian})
              {
                const auto &r = (*rows)[i];
                csv << ',' << if_complete(r.complete, r.mean) << ','
                    << if_complete(r.complete, r.standard_error) << ',' << (r.complete ? 1 : 0);
              }
          csv << '\n';
        }
      return csv.str();
    }

    /** Bin edges carry the energy unit in their name in physical units ("bin_low_eV"). */
    std::string localisation_csv(const std::vector<BoundaryAnalysis> &all, const AnalysisInput &in)
    {
      const std::string unit = in.solver_energy_unit > 0.0 && in.energy_column.rfind("energy_", 0) == 0 ?
                                 in.energy_column.substr(6) :
                                 std::string();
      std::ostringstream csv;
      csv << "bin_low" << unit << ",bin_high" << unit;
      for (const auto &a : all)
        csv << ",ratio_" << a.name << ",ratio_stderr_" << a.name << ",ratio_count_" << a.name
            << ",ipr_" << a.name << ",ipr_stderr_" << a.name << ",ipr_count_" << a.name;
      csv << '\n';
      const std::size_t n = all.empty() ? 0 : all[0].ratios.size();
      for (std::size_t b = 0; b < n; ++b)
        {
          csv << csv_number(all[0].ratios[b].lower) << ',' << csv_number(all[0].ratios[b].upper);
          for (const auto &a : all)
            csv << ',' << csv_number(a.ratios[b].mean) << ',' << csv_number(a.ratios[b].standard_error) << ','
                << a.ratios[b].count << ',' << csv_number(a.ipr[b].mean) << ','
                << csv_number(a.ipr[b].standard_error) << ',' << a.ipr[b].count;
          csv << '\n';
        }
      return csv.str();
    }

    Json fit_json(const TailFit &f, bool lifshitz)
    {
      Json j;
      j["resolved"]       = f.resolved;
      j["reason"]         = f.reason;
      j["window"]         = {json_number(f.window_low), json_number(f.window_high)};
      j["points"]         = f.points;
      j["states"]         = f.states;
      j["realisations"]   = f.realisations;
      j["slope"]          = json_number(f.slope);
      j["slope_stderr"]   = json_number(f.slope_error);
      j["slope_interval"] = {json_number(f.slope_low), json_number(f.slope_high)};
      j["intercept"]      = json_number(f.intercept);
      j["chi_squared"]    = json_number(f.chi_squared);
      j["dof"]            = f.dof;
      if (lifshitz)
        {
          j["expected_slope"]           = json_number(f.expected_slope);
          j["consistent_with_expected"] = f.consistent;
        }
      else
        {
          j["urbach_energy"]    = json_number(f.urbach_energy);
          j["urbach_interval"]  = {json_number(f.urbach_low), json_number(f.urbach_high)};
          j["reference_energy"] = json_number(f.reference_energy);
        }
      return j;
    }

    Json tails_json(const std::vector<BoundaryAnalysis> &all, const AnalysisInput &in,
                    const AnalysisSettings &s)
    {
      Json j                 = manifest_header("tail fits");
      j["band_bottom"]       = json_number(in.band_bottom);
      j["dimension"]         = in.dimension;
      j["confidence_level"]  = json_number(s.confidence_level);
      j["gaussian_width"]    = json_number(s.gaussian_width);
      j["energy_unit"]       = in.energy_unit;
      j["missing_value"]     = "null";
      Json lifshitz = Json::object(), urbach = Json::object();
      for (const auto &a : all)
        {
          lifshitz[a.name] = fit_json(a.lifshitz, true);
          urbach[a.name]   = fit_json(a.urbach, false);
        }
      j["lifshitz"] = lifshitz;
      j["urbach"]   = urbach;
      return j;
    }

    /** IDS table for the figure: ids.csv by name if there is one, else from the records. */
    Columns ids_columns(const std::string &output_dir, const AnalysisInput &in,
                        const std::vector<BoundaryAnalysis> &all, std::vector<std::string> &notes)
    {
      std::string path = in.ids_table;
      if (path.empty() && std::filesystem::exists(output_dir + "/ids.csv"))
        path = output_dir + "/ids.csv";
      Columns table;
      if (!path.empty())
        {
          table = read_csv_columns(path);
          if (table["energy"] != in.energies)
            {
              notes.push_back(path + " has another energy grid than the records' analysis: the IDS "
                                     "figure shows its own columns with ±z·stderr bands");
              return table;
            }
        }
      else
        {
          table["energy"] = in.energies;
          notes.push_back("no ids.csv given: the IDS figure is drawn from the records, without "
                          "the semiclassical curve");
        }
      for (const auto &a : all)
        {
          auto &mean = table["ids_" + a.name], &lo = table["lower_" + a.name],
               &hi = table["upper_" + a.name], &comp = table["complete_" + a.name];
          const bool fill = mean.empty();
          if (fill)
            comp.clear();
          lo.clear(), hi.clear();
          for (const auto &r : a.band)
            {
              if (fill)
                mean.push_back(r.mean), comp.push_back(r.complete ? 1.0 : 0.0);
              lo.push_back(r.lower), hi.push_back(r.upper);
            }
        }
      return table;
    }

    /**
     * Checks that hold exactly for the model, whatever the data: every
     * eigenvalue lies above E0 = min supp of the law (H ≥ q_min; Galerkin
     * eigenvalues are upper bounds), and for each realisation the Dirichlet
     * count lies below the Neumann count (min–max: the Dirichlet form domain is
     * contained in the Neumann one), wherever both are complete.
     */
    std::vector<ReportCheck> exact_checks(const AnalysisInput &in)
    {
      std::vector<ReportCheck> checks;
      double                   lowest = std::numeric_limits<double>::infinity();
      for (const auto &r : in.records)
        for (const double x : r.eigenvalues)
          lowest = std::min(lowest, x);
      const double tolerance = 1e-9 * std::max(1.0, std::abs(in.band_bottom));
      checks.push_back({"spectrum above E0 (H ≥ min of the law's support)",
                        !(lowest < in.band_bottom - tolerance),
                        "lowest eigenvalue " + brief(lowest) + ", E0 = " + brief(in.band_bottom)});

      std::map<std::uint64_t, const RealisationRecord *> dirichlet, neumann;
      for (const auto &r : in.records)
        (r.boundary == "dirichlet" ? dirichlet : neumann)[r.realisation] = &r;
      std::size_t pairs = 0, violations = 0;
      for (const auto &[id, d] : dirichlet)
        {
          const auto it = neumann.find(id);
          if (it == neumann.end() || it->second->boundary != "neumann")
            continue;
          ++pairs;
          const auto cd = counting_function(d->eigenvalues, in.volume, in.energies);
          const auto cn = counting_function(it->second->eigenvalues, in.volume, in.energies);
          for (std::size_t i = 0; i < in.energies.size(); ++i)
            if (in.energies[i] <= std::min(d->complete_up_to, it->second->complete_up_to) &&
                cd[i] > cn[i])
              ++violations;
        }
      if (pairs > 0)
        checks.push_back({"Dirichlet–Neumann bracketing per realisation", violations == 0,
                          std::to_string(pairs) + " realisations compared, " +
                            std::to_string(violations) + " grid points with N_D > N_N"});
      return checks;
    }

    bool is_deterministic(const AnalysisInput &in)
    {
      if (in.fixed_potential)
        return true;
      std::set<std::uint64_t> realisations;
      for (const auto &r : in.records)
        realisations.insert(r.realisation);
      return realisations.size() == 1;
    }

    /**
     * The eigenvalues of one fixed potential with their residuals, absolute
     * error bounds and Richardson-extrapolated values. The bound is
     * @f$F\,\hat e@f$ with @f$\hat e@f$ the Richardson estimate of
     * @f$\lambda_h - \lambda@f$ and F the safety factor, so
     * @f$\lambda_h - \hat e = \lambda_h - \text{bound}/F@f$ is the extrapolated value
     * (which costs nothing once @f$\lambda_{h/2}@f$ is known).
     */
    ReportTable eigenvalue_table(const AnalysisInput &in)
    {
      const std::string unit =
        in.energy_column.rfind("energy_", 0) == 0 ? in.energy_column.substr(7) : "reduced units";
      ReportTable t{"Eigenvalues of the fixed potential (lowest " +
                      std::to_string(max_eigenvalue_rows) + " per boundary condition; energies in " +
                      unit + "). Error bound: absolute, on λ_h − λ, " +
                      short_number(in.error_safety_factor) +
                      " × the Richardson estimate; the extrapolated value is λ_h minus that "
                      "estimate. Residual: relative, ‖Ku − λMu‖/(max(|λ|,1)‖Mu‖).",
                    {"boundary", "index", "eigenvalue λ_h", "residual (relative)",
                     "error bound (absolute)", "Richardson-extrapolated λ"},
                    {}};
      std::set<std::string> seen;
      for (const auto &r : in.records)
        {
          if (!seen.insert(r.boundary).second)
            continue; // one realisation per boundary condition
          const std::size_t n = std::min<std::size_t>(r.eigenvalues.size(), max_eigenvalue_rows);
          for (std::size_t j = 0; j < n; ++j)
            {
              const double error = j < r.errors.size() ? r.errors[j] : std::nan("");
              const double res   = j < r.residuals.size() ? r.residuals[j] : std::nan("");
              const bool   have  = std::isfinite(error);
              t.rows.push_back({r.boundary, std::to_string(j), short_number(r.eigenvalues[j], 10),
                                short_number(res, 2),
                                have ? short_number(error, 3) : "not estimated",
                                have ? short_number(r.eigenvalues[j] - error / in.error_safety_factor, 10) :
                                       "needs discretisation/error estimate"});
            }
        }
      return t;
    }

    /**
     * Maps of the lowest eigenfunctions of a fixed potential from the study's
     * eigenfunction_slice_<bc>.csv: a curve per function in 1D, one panel per
     * function (colour = ψ) in 2D and on the mid-plane in 3D.
     */
    Figure eigenfunction_figure(FigureMaker &maker, const AnalysisInput &in, const std::string &bc)
    {
      const std::string file =
        (std::filesystem::path(in.source_directory) / ("eigenfunction_slice_" + bc + ".csv")).string();
      Figure none{"eigenfunctions_" + bc, "", "", {}, true};
      if (in.source_directory.empty() || !std::filesystem::exists(file))
        return none;
      const Columns table = read_csv_columns(file);
      std::vector<std::string> psi;
      for (int j = 0; table.count("psi_" + std::to_string(j)); ++j)
        psi.push_back("psi_" + std::to_string(j));
      std::vector<double> x, y; // "x" or "x_nm"
      for (const auto &[name, values] : table)
        {
          if (name.rfind("x", 0) == 0)
            x = values;
          if (name.rfind("y", 0) == 0)
            y = values;
        }
      if (psi.empty() || x.empty() || y.size() != x.size())
        return none;
      std::ostringstream data;
      for (std::size_t k = 0; k < x.size(); ++k)
        {
          data << csv_number(x[k]) << ' ' << csv_number(y[k]);
          for (const auto &p : psi)
            data << ' ' << csv_number(table.at(p)[k]);
          data << '\n';
        }
      // Eigenvalues for the titles.
      std::vector<double> levels;
      for (const auto &r : in.records)
        if (r.boundary == bc)
          {
            levels = r.eigenvalues;
            break;
          }
      const std::string unit =
        in.energy_column.rfind("energy_", 0) == 0 ? " " + in.energy_column.substr(7) : "";
      const std::string length = in.solver_energy_unit > 0.0 ? " (nm)" : " (cells)";
      const auto title = [&](std::size_t j) {
        return "ψ_" + std::to_string(j) +
               (j < levels.size() ? ", λ = " + short_number(levels[j], 5) + unit : "");
      };
      std::ostringstream plot;
      if (in.dimension == 1)
        {
          plot << "set xlabel " << gnuplot_string("x" + length) << "\nset ylabel 'ψ(x)'\nplot ";
          for (std::size_t j = 0; j < psi.size(); ++j)
            plot << (j ? ", " : "") << "data using 1:" << 3 + j << " with lines lw 2 title "
                 << gnuplot_string(title(j));
          plot << "\n";
        }
      else
        {
          const std::size_t columns = psi.size() > 1 ? 2 : 1, rows = (psi.size() + 1) / 2;
          plot << "set palette defined (-1 '#2166ac', 0 '#f7f7f7', 1 '#b2182b')\n"
               << "set size ratio -1\nunset key\nset xlabel " << gnuplot_string("x" + length)
               << "\nset ylabel " << gnuplot_string("y" + length) << "\n"
               << "set multiplot layout " << rows << "," << columns << "\n";
          for (std::size_t j = 0; j < psi.size(); ++j)
            {
              double top = 0;
              for (const double v : table.at(psi[j]))
                top = std::max(top, std::abs(v));
              plot << "set title " << gnuplot_string(title(j)) << "\nset cbrange ["
                   << csv_number(-top) << ":" << csv_number(top) << "]\n"
                   << "plot data using 1:2:" << 3 + j << " with points pt 5 ps 1.1 lc palette\n";
            }
          plot << "unset multiplot\n";
        }
      std::string where = in.dimension == 3 ? " on the mid-plane of the box" : "";
      return maker.make("eigenfunctions_" + bc, "Lowest eigenfunctions (" + bc + ")",
                        "The lowest " + std::to_string(psi.size()) + " eigenfunctions of the fixed "
                        "potential under the " + bc + " condition" + where +
                          " (colour: ψ, blue negative, red positive; each panel on its own scale).",
                        data.str(), plot.str());
    }

    /** The few lines a run ends with: band bottom, bracket at three energies, tails, report. */
    std::vector<std::string> closing_summary(const std::string &output_dir, const AnalysisInput &in,
                                             const std::vector<BoundaryAnalysis> &all)
    {
      const std::string unit =
        in.energy_column.rfind("energy_", 0) == 0 ? " " + in.energy_column.substr(7) : "";
      std::vector<std::string> lines;
      std::string              bottom = "Band bottom E0 = " + short_number(in.band_bottom) + unit;
      for (const auto &a : all)
        {
          double lowest = std::numeric_limits<double>::infinity();
          for (const auto &r : in.records)
            if (r.boundary == a.name)
              for (const double x : r.eigenvalues)
                lowest = std::min(lowest, x);
          if (std::isfinite(lowest))
            bottom += "; lowest " + a.name + " level " + short_number(lowest) + unit;
        }
      lines.push_back(bottom);
      // Three energies spread over those where every boundary is complete.
      std::vector<std::size_t> complete;
      for (std::size_t i = 0; i < in.energies.size(); ++i)
        if (std::all_of(all.begin(), all.end(), [&](const BoundaryAnalysis &a) {
              return a.band[i].complete;
            }))
          complete.push_back(i);
      if (!complete.empty() && !all.empty())
        {
          std::string line = "Mean IDS [";
          for (std::size_t b = 0; b < all.size(); ++b)
            line += (b ? ", " : "") + all[b].name;
          line += "] in " + density_unit(in, false) + ":";
          std::size_t previous = in.energies.size();
          for (const double q : {0.25, 0.5, 0.75})
            {
              const std::size_t i = complete[std::size_t(q * double(complete.size() - 1))];
              if (i == previous)
                continue;
              previous = i;
              line += " E = " + short_number(in.energies[i]) + unit + ": [";
              for (std::size_t b = 0; b < all.size(); ++b)
                line += (b ? ", " : "") + short_number(all[b].band[i].mean, 3);
              line += "];";
            }
          line.pop_back();
          lines.push_back(line);
        }
      else
        lines.push_back("No grid energy where every realisation's spectrum is complete: no IDS "
                        "to show (raise spectrum/eigenvalues)");
      std::string tails = "Tail fits resolved:";
      for (const auto &a : all)
        tails += " " + a.name + " Lifshitz " + (a.lifshitz.resolved ? "yes" : "no") + ", Urbach " +
                 (a.urbach.resolved ? "yes (E_U = " + short_number(a.urbach.urbach_energy, 3) + unit +
                                        ")" :
                                      "no") +
                 ";";
      tails.back() = ' ';
      lines.push_back(tails + "(reasons in tails.json)");
      lines.push_back("Report: " + (std::filesystem::path(output_dir) / "report.html").string());
      return lines;
    }

    /**
     * One line when the computed spectra do not reach the top of the grid plus
     * the Lorentzian margin, with the number of eigenvalues that would, from
     * Weyl's law N ∝ (E − E_low)^{d/2} (an estimate).
     */
    std::string coverage_warning(const AnalysisInput &in, const AnalysisSettings &s)
    {
      if (in.records.empty() || in.energies.empty())
        return {};
      double      reach = std::numeric_limits<double>::infinity(), low = reach;
      std::size_t most  = 0;
      for (const auto &r : in.records)
        {
          reach = std::min(reach, r.complete_up_to);
          most  = std::max(most, r.eigenvalues.size());
          for (const double x : r.eigenvalues)
            low = std::min(low, x);
        }
      const double need = in.energies.back() + incomplete_margin(Broadening::lorentzian) * s.lorentzian_width;
      if (!(need > reach) || !(reach > low) || most == 0)
        return {};
      const double ratio  = std::pow((need - low) / (reach - low), 0.5 * double(in.dimension));
      const auto   enough = std::size_t(std::ceil(double(most) * ratio));
      const std::string unit = in.energy_column.rfind("energy_", 0) == 0 ? " " + in.energy_column.substr(7) : "";
      return "the " + std::to_string(most) + " eigenvalues per solve are complete up to " +
             short_number(reach) + unit + " in every realisation, but the grid ends at " +
             short_number(in.energies.back()) + unit + " and the Lorentzian needs " +
             short_number(need - in.energies.back()) + unit +
             " beyond it: about " + std::to_string(enough) +
             " eigenvalues (spectrum/eigenvalues) would cover it (Weyl scaling, an estimate); "
             "Lorentzian DOS entries above " +
             short_number(reach - (need - in.energies.back())) + unit + " are written as missing";
    }

    std::vector<std::string> analyse(const std::string &output_dir, const AnalysisInput &in,
                                     const AnalysisSettings &requested, ReportContent report)
    {
      std::vector<std::string> chosen;
      const AnalysisSettings   s = requested.resolved_for(in.records, chosen);
      if (in.energies.empty() || !(in.volume > 0.0) || in.dimension < 1 || in.dimension > 3 ||
          !(in.cell_size > 0.0))
        throw InputError("analysis: need a non-empty energy grid, a volume > 0, a cell size > 0 "
                         "and a dimension of 1 to 3");
      std::filesystem::create_directories(output_dir);
      std::vector<BoundaryAnalysis> all;
      for (const auto &bc : in.boundaries)
        all.push_back(analyse_boundary(in, bc, s));

      write_text(output_dir + "/ids_band.csv", with_energy_columns(ids_band_csv(all, in.energies), in));
      write_text(output_dir + "/dos.csv", with_energy_columns(dos_csv(all, in.energies), in));
      write_text(output_dir + "/localisation.csv", localisation_csv(all, in));
      write_json_file(output_dir, "tails.json", tails_json(all, in, s));

      const double cell_volume = std::pow(in.cell_size, double(in.dimension));
      FigureMaker  maker(output_dir + "/figures", s.figure_formats, in.energy_unit);
      maker.set_density_units(density_unit(in, false), density_unit(in, true));
      std::vector<std::string> names;
      std::vector<std::vector<IntervalRow>> lor, gau;
      std::vector<std::vector<GridValue>>   ids;
      std::vector<std::vector<BinRow>>      ratios, ipr;
      std::vector<TailFit>                  lif, urb;
      for (const auto &a : all)
        {
          names.push_back(a.name), lor.push_back(a.lorentzian), gau.push_back(a.gaussian);
          ids.push_back(a.ids), ratios.push_back(a.ratios), ipr.push_back(a.ipr);
          lif.push_back(a.lifshitz), urb.push_back(a.urbach);
        }
      const Columns table = ids_columns(output_dir, in, all, report.notes);
      report.figures.push_back(ids_figure(maker, table, names, s.confidence_level));
      report.figures.push_back(dos_figure(maker, names, lor, gau, s.lorentzian_width,
                                          s.gaussian_width));
      // One fixed potential has no ensemble: no tail fits, bands or level statistics.
      const bool deterministic = is_deterministic(in);
      if (!deterministic)
        {
          report.figures.push_back(
            lifshitz_figure(maker, names, ids, lif, in.band_bottom, cell_volume));
          report.figures.push_back(urbach_figure(maker, names, gau, urb));
        }
      if (!deterministic && !ratios.empty() && !ratios[0].empty())
        {
          report.figures.push_back(ipr_figure(maker, names, ipr, in.volume, cell_volume));
          report.figures.push_back(ratio_figure(maker, names, ratios));
        }

      // Report: key numbers, fits, checks, notes.
      if (report.title.empty())
        report.title = "alloyspec analysis";
      if (report.model_summary.empty())
        report.model_summary = in.model_summary;
      report.parameters_text = in.parameters_text;
      std::ostringstream box;
      for (std::size_t d = 0; d < in.cells.size(); ++d)
        box << (d ? " × " : "") << in.cells[d];
      report.key_numbers.insert(report.key_numbers.begin(),
                                {{"box (cells)", box.str()},
                                 {"cell size", brief(in.cell_size)},
                                 {"volume |Λ|", brief(in.volume)},
                                 {"bottom of the spectrum E0", brief(in.band_bottom)},
                                 {"mean potential", brief(in.mean_potential)},
                                 {"energy unit", in.energy_unit},
                                 {"broadening η (Lorentzian), σ (Gaussian); bin width",
                                  short_number(s.lorentzian_width) + ", " +
                                    short_number(s.gaussian_width) + "; " +
                                    short_number(s.bin_width) +
                                    (chosen.empty() ? "" : " (automatic ones chosen from the spectrum)")}});
      for (const auto &c : chosen)
        report.notes.push_back("Chosen from the computed spectrum: " + c + ".");
      for (const auto &a : all)
        {
          std::size_t complete = 0;
          for (const auto &r : a.band)
            complete += r.complete;
          report.key_numbers.push_back({"realisations (" + a.name + ")",
                                        std::to_string(a.realisations) + ", IDS complete at " +
                                          std::to_string(complete) + " of " +
                                          std::to_string(a.band.size()) + " grid energies"});
        }
      if (deterministic)
        {
          for (const auto &a : all)
            if (auto f = eigenfunction_figure(maker, in, a.name); !f.empty)
              report.figures.push_back(std::move(f));
          report.tables.push_back(eigenvalue_table(in));
          report.notes.push_back(
            "A fixed potential (the 'file' law or a single realisation): the report lists its "
            "eigenvalues instead of ensemble statistics (tail fits, bootstrap bands and level "
            "statistics need many realisations).");
        }
      ReportTable fits{"Tail fits (interval at confidence " + brief(s.confidence_level) + ")",
                       {"boundary", "fit", "window", "points / states / realisations", "result",
                        "resolved", "comment"},
                       {}};
      for (const auto &a : all)
        {
          const auto window = [](const TailFit &f) {
            return "[" + brief(f.window_low) + ", " + brief(f.window_high) + "]";
          };
          const auto counts = [](const TailFit &f) {
            return std::to_string(f.points) + " / " + std::to_string(f.states) + " / " +
                   std::to_string(f.realisations);
          };
          fits.rows.push_back({a.name, "Lifshitz slope", window(a.lifshitz), counts(a.lifshitz),
                               brief(a.lifshitz.slope) + " [" + brief(a.lifshitz.slope_low) + ", " +
                                 brief(a.lifshitz.slope_high) + "], −d/2 = " +
                                 brief(a.lifshitz.expected_slope),
                               a.lifshitz.resolved ? "yes" : "no", a.lifshitz.reason});
          fits.rows.push_back({a.name, "Urbach energy", window(a.urbach), counts(a.urbach),
                               brief(a.urbach.urbach_energy) + " [" + brief(a.urbach.urbach_low) +
                                 ", " + brief(a.urbach.urbach_high) + "]",
                               a.urbach.resolved ? "yes" : "no", a.urbach.reason});
        }
      if (!deterministic)
        report.tables.push_back(fits);
      ReportTable sample{"IDS at selected energies (mean and bootstrap interval; * = incomplete)",
                         {"energy"},
                         {}};
      for (const auto &a : all)
        sample.header.push_back("N(E) " + a.name);
      const std::size_t n_e = in.energies.size(), step = std::max<std::size_t>(1, n_e / 10);
      for (std::size_t i = 0; i < n_e; i += step)
        {
          std::vector<std::string> row{brief(in.energies[i])};
          for (const auto &a : all)
            row.push_back(brief(a.band[i].mean) + " [" + brief(a.band[i].lower) + ", " +
                          brief(a.band[i].upper) + "]" + (a.band[i].complete ? "" : " *"));
          sample.rows.push_back(row);
        }
      if (!deterministic)
        report.tables.push_back(sample);
      for (auto &c : exact_checks(in))
        report.checks.push_back(c);
      if (!deterministic)
        report.notes.push_back(
        "Lifshitz fits use neighbouring grid points that share realisations; their errors are "
        "correlated, so the slope interval is approximate. In a Dirichlet box of L cells the "
        "spectrum starts about dπ²/(La)² above E0, which cuts the tail off at low energy.");
      std::vector<std::string> warnings = maker.warnings();
      if (const auto w = coverage_warning(in, s); !w.empty())
        warnings.insert(warnings.begin(), w);
      for (const auto &w : warnings)
        report.notes.push_back(w);
      write_text(output_dir + "/report.html", render_report(report));
      // The report's key numbers, for scripts.
      Json key = manifest_header("analysis");
      key["missing_value"] = "null";
      Json numbers         = Json::object();
      for (const auto &[name, value] : report.key_numbers)
        numbers[name] = value;
      key["key_numbers"] = numbers;
      auto lines         = closing_summary(output_dir, in, all);
      for (const auto &[name, value] : report.key_numbers)
        if (name == "1/L fits") // a box-size series: its result comes first
          lines.insert(lines.begin(), "Box-size series: " + value);
      key["summary"] = lines;
      write_json_file(output_dir, "key_numbers.json", key);
      return warnings;
    }
  } // namespace

  std::string with_energy_columns(const std::string &csv, const AnalysisInput &input)
  {
    if (!(input.solver_energy_unit > 0.0))
      return csv;
    std::istringstream in(csv);
    std::ostringstream out;
    std::string        line;
    bool               header = true;
    while (std::getline(in, line))
      {
        const auto  comma = line.find(',');
        std::string first = line.substr(0, comma);
        std::string rest  = comma == std::string::npos ? std::string() : line.substr(comma);
        if (header)
          {
            if (first != "energy")
              return csv; // not an energy table: leave it alone
            out << input.energy_column << ",energy_reduced" << rest << '\n';
            header = false;
            continue;
          }
        const double e = std::strtod(first.c_str(), nullptr);
        out << first << ',' << csv_number(e / input.solver_energy_unit) << rest << '\n';
      }
    return out.str();
  }

  std::vector<std::string> write_analysis(const std::string &output_dir, const AnalysisInput &input,
                                          const AnalysisSettings &settings)
  {
    return analyse(output_dir, input, settings, ReportContent{});
  }

  std::vector<std::string> write_analysis(const std::string &output_dir, const AnalysisInput &input,
                                          const AnalysisSettings &settings, ReportContent report)
  {
    return analyse(output_dir, input, settings, std::move(report));
  }

  std::string density_unit(const AnalysisInput &input, const bool per_energy)
  {
    static const char *powers[] = {"", "⁻¹", "⁻²", "⁻³"};
    const bool         physical = input.solver_energy_unit > 0.0;
    const std::string  length   = physical ? "nm" : "ℓ";
    const std::string  energy =
      physical && input.energy_column.rfind("energy_", 0) == 0 ? input.energy_column.substr(7) : "ε";
    std::string unit = length + powers[std::min(input.dimension, 3u)];
    if (per_energy)
      unit = energy + "⁻¹·" + unit;
    return unit;
  }

} // namespace alloyspec
