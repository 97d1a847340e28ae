/** @file figures.cc  gnuplot scripts and data files for the analysis figures. */
#include <alloyspec/core/errors.h>
#include <alloyspec/core/format.h>
#include <alloyspec/analysis/figures.h>
#include <alloyspec/io/results_store.h>

#include <algorithm>
#include <cmath>
#include <filesystem>
#include <fstream>
#include <limits>
#include <sstream>

#include <fcntl.h>
#include <spawn.h>
#include <sys/wait.h>
#include <unistd.h>

extern char **environ;

namespace alloyspec
{
  namespace
  {
    constexpr double nan = std::numeric_limits<double>::quiet_NaN();

    /** Colour per boundary condition, the same in every figure. */
    std::string colour(const std::string &boundary)
    {
      if (boundary == "dirichlet")
        return "#1f5fa8";
      if (boundary == "neumann")
        return "#c0392b";
      return "#2e8b57";
    }

    /** Numbers as gnuplot reads them; NaN marks a missing point (breaks lines). */
    std::string num(const double x)
    {
      if (!std::isfinite(x))
        return "NaN";
      return csv_number(x); // full precision, like every table
    }

    /** Column @p name of @p table, or an empty vector. */
    const std::vector<double> &column(const Columns &table, const std::string &name)
    {
      static const std::vector<double> none;
      const auto                       it = table.find(name);
      return it == table.end() ? none : it->second;
    }

    double at(const std::vector<double> &v, std::size_t i) { return i < v.size() ? v[i] : nan; }

    std::string style_header()
    {
      return "set encoding utf8\n"
             // No 'set datafile missing': the tables' nan is then an undefined
             // value, which breaks a line, where a 'missing' one would be bridged.
             "set grid lc rgb '#dddddd'\n"
             "set key outside right top vertical nobox noopaque samplen 1.5 spacing 0.9 font ',10'\n"
             "set border lw 1.2\n"
             "set samples 400\n";
    }
  } // namespace

  std::string legend_name(const std::string &boundary)
  {
    if (boundary == "dirichlet")
      return "Dirichlet";
    if (boundary == "neumann")
      return "Neumann";
    return boundary;
  }

  std::string gnuplot_string(const std::string &text)
  {
    std::string out = "'";
    for (const char c : text)
      {
        if (c == '\'')
          out += "''";
        else if (c != '\n' && c != '\r')
          out += c;
      }
    return out + "'";
  }

  Columns read_csv_columns(const std::string &path)
  {
    std::ifstream in(path);
    if (!in)
      throw InputError(path + ": cannot open the table for reading");
    std::string line;
    if (!std::getline(in, line))
      throw InputError(path + ": the table is empty (expected a header line)");
    const auto split = [](const std::string &text) {
      std::vector<std::string> cells;
      std::stringstream        s(text);
      std::string              cell;
      while (std::getline(s, cell, ','))
        cells.push_back(cell);
      if (!text.empty() && text.back() == ',')
        cells.emplace_back();
      return cells;
    };
    if (!line.empty() && line.back() == '\r')
      line.pop_back();
    const auto names = split(line);
    Columns    table;
    for (const auto &n : names)
      table[n];
    std::size_t row = 1;
    while (std::getline(in, line))
      {
        ++row;
        if (!line.empty() && line.back() == '\r')
          line.pop_back();
        if (line.empty())
          continue;
        const auto cells = split(line);
        if (cells.size() != names.size())
          throw InputError(path + ", line " + std::to_string(row) + ": " +
                           std::to_string(cells.size()) + " cells, the header names " +
                           std::to_string(names.size()));
        for (std::size_t k = 0; k < cells.size(); ++k)
          {
            char        *end   = nullptr;
            const double value = std::strtod(cells[k].c_str(), &end);
            const bool   whole = !cells[k].empty() && end == cells[k].c_str() + cells[k].size();
            table[names[k]].push_back(whole ? value : nan);
          }
      }
    // Tables in physical units name their energy column with its unit
    // ("energy_eV"); readers look it up as "energy".
    if (table.count("energy") == 0 && !names.empty() && names[0].rfind("energy_", 0) == 0 &&
        names[0] != "energy_reduced")
      table["energy"] = table[names[0]];
    return table;
  }

  FigureMaker::FigureMaker(std::string directory, std::vector<std::string> formats,
                           std::string energy_label, std::string gnuplot)
    : directory_(std::move(directory))
    , formats_(std::move(formats))
    , energy_label_(std::move(energy_label))
    , gnuplot_(std::move(gnuplot))
  {
    std::filesystem::create_directories(directory_);
    directory_ = std::filesystem::absolute(directory_).string();
    available_ = ::access(gnuplot_.c_str(), X_OK) == 0;
    if (!available_ && !formats_.empty())
      warnings_.push_back("gnuplot not found at " + gnuplot_ +
                          ": figures skipped (data files and scripts are in " + directory_ +
                          "; install gnuplot, e.g. the Debian package gnuplot-nox, to draw them)");
  }

  Figure FigureMaker::make(const std::string &name, const std::string &title,
                           const std::string &caption, const std::string &data,
                           const std::string &commands)
  {
    Figure figure{name, title, caption, {}, false};
    // A figure needs at least two rows with a value to show: otherwise it is
    // omitted, not drawn as an empty frame (gnuplot would also fail on it).
    {
      std::istringstream lines(data);
      std::size_t        rows = 0;
      for (std::string line; std::getline(lines, line) && rows < 2;)
        {
          if (line.empty() || line[0] == '#')
            continue;
          std::istringstream words(line);
          std::string        word;
          words >> word; // the abscissa
          bool any = false;
          while (words >> word)
            any = any || std::isfinite(std::strtod(word.c_str(), nullptr));
          rows += any;
        }
      if (rows < 2)
        {
          figure.empty = true;
          return figure;
        }
    }
    const std::string stem = directory_ + "/" + name;
    ResultsStore::write_file_in(directory_, name + ".dat", data);
    std::ostringstream script;
    script << "# " << title << "\n" << style_header() << "data = " << gnuplot_string(stem + ".dat")
           << "\n";
    for (const auto &format : formats_)
      {
        if (format == "png")
          script << "set terminal pngcairo size 960,640 font 'DejaVu Sans,12' noenhanced\n";
        else
          script << "set terminal svg size 960,640 dynamic font 'DejaVu Sans,12' noenhanced\n";
        // Drawn under a temporary name and renamed once gnuplot succeeded, so
        // a crash never leaves a half-drawn figure under the real name.
        script << "set output " << gnuplot_string(stem + ".partial." + format) << "\n"
               << "set title " << gnuplot_string(title) << "\n"
               << commands << "\nset output\n";
      }
    ResultsStore::write_file_in(directory_, name + ".gp", script.str());
    if (!available_ || formats_.empty())
      return figure;

    // Run gnuplot without a shell (no quoting of paths); its messages go to a log.
    const std::string          log = directory_ + "/gnuplot.log";
    posix_spawn_file_actions_t actions;
    posix_spawn_file_actions_init(&actions);
    posix_spawn_file_actions_addopen(&actions, 1, log.c_str(), O_WRONLY | O_CREAT | O_APPEND, 0644);
    posix_spawn_file_actions_adddup2(&actions, 1, 2);
    const std::string script_path = stem + ".gp";
    char *argv[] = {const_cast<char *>(gnuplot_.c_str()), const_cast<char *>(script_path.c_str()),
                    nullptr};
    pid_t     pid    = 0;
    const int failed = posix_spawn(&pid, gnuplot_.c_str(), &actions, nullptr, argv, environ);
    posix_spawn_file_actions_destroy(&actions);
    int status = 0;
    if (failed != 0 || waitpid(pid, &status, 0) < 0 || !WIFEXITED(status) ||
        WEXITSTATUS(status) != 0)
      warnings_.push_back("gnuplot failed on figure '" + name + "' (see " + log + ")");
    const bool drawn = failed == 0 && WIFEXITED(status) && WEXITSTATUS(status) == 0;
    for (const auto &format : formats_)
      {
        const std::string file = stem + "." + format, partial = stem + ".partial." + format;
        std::error_code   ec;
        if (drawn && std::filesystem::exists(partial, ec) &&
            std::filesystem::file_size(partial, ec) > 0)
          std::filesystem::rename(partial, file, ec);
        else
          std::filesystem::remove(partial, ec);
        if (drawn && !ec && std::filesystem::exists(file, ec))
          figure.files.push_back(file);
        else
          warnings_.push_back("figure file " + file + " was not written");
      }
    return figure;
  }

  Figure ids_figure(FigureMaker &maker, const Columns &ids,
                    const std::vector<std::string> &boundaries, const double confidence)
  {
    const auto        &energy = column(ids, "energy");
    const double       z      = normal_quantile(0.5 + confidence / 2);
    const auto        &semi   = column(ids, "semiclassical");
    std::ostringstream data;
    data << "# energy";
    for (const auto &bc : boundaries)
      data << " ids_" << bc << " lower_" << bc << " upper_" << bc;
    data << " semiclassical\n";
    for (std::size_t i = 0; i < energy.size(); ++i)
      {
        data << num(energy[i]);
        for (const auto &bc : boundaries)
          {
            const auto  &mean  = column(ids, "ids_" + bc);
            const auto  &se    = column(ids, "stderr_" + bc);
            const auto  &lower = column(ids, "lower_" + bc);
            const auto  &upper = column(ids, "upper_" + bc);
            const auto  &comp  = column(ids, "complete_" + bc);
            const bool   ok    = comp.empty() || at(comp, i) == 1.0;
            const double m     = ok ? at(mean, i) : nan;
            const double lo    = lower.empty() ? m - z * at(se, i) : at(lower, i);
            const double hi    = upper.empty() ? m + z * at(se, i) : at(upper, i);
            data << ' ' << num(m) << ' ' << num(ok ? lo : nan) << ' ' << num(ok ? hi : nan);
          }
        data << ' ' << num(at(semi, i)) << '\n';
      }
    std::ostringstream plot;
    plot << "set xlabel " << gnuplot_string(maker.energy_label()) << "\n"
         << "set ylabel " << gnuplot_string("IDS N(E) (" + maker.ids_unit() + ")") << "\n"
         << "plot ";
    for (std::size_t b = 0; b < boundaries.size(); ++b)
      {
        const std::size_t c = 2 + 3 * b;
        plot << "data using 1:" << c + 1 << ":" << c + 2 << " with filledcurves fc rgb '"
             << colour(boundaries[b]) << "' fs transparent solid 0.25 noborder title "
             << gnuplot_string(legend_name(boundaries[b]) + " band") << ", \\\n     data using 1:" << c
             << " with lines lw 2 lc rgb '" << colour(boundaries[b]) << "' title "
             << gnuplot_string(legend_name(boundaries[b])) << ", \\\n     ";
      }
    const bool has_semi =
      std::any_of(semi.begin(), semi.end(), [](double x) { return std::isfinite(x); });
    if (has_semi)
      plot << "data using 1:" << 2 + 3 * boundaries.size()
           << " with lines dt 2 lw 1.5 lc rgb 'black' title 'semiclassical'\n";
    else
      plot << "NaN notitle\n";
    std::ostringstream caption;
    caption << "Mean IDS over realisations per boundary condition. Band: "
            << (column(ids, "lower_" + (boundaries.empty() ? "" : boundaries[0])).empty()
                  ? "mean ± z·standard error"
                  : "bootstrap percentile interval")
            << " at confidence " << confidence
            << ". Dirichlet lies below and Neumann above the infinite-volume IDS "
               "(Kirsch & Martinelli 1982). "
            << (has_semi ? "Dashed: semiclassical count E_q[(E−q)₊^{d/2}]·ω_d/(2π)^d (Weyl's "
                           "law cell by cell). "
                         : "")
            << "Curves stop where some realisation's spectrum is incomplete. Steps and kinks in a "
               "small box are box-quantisation structure (the levels of the finite box), not "
               "features of the infinite-volume IDS.";
    return maker.make("ids", "Integrated density of states", caption.str(), data.str(),
                      plot.str());
  }

  Figure dos_figure(FigureMaker &maker, const std::vector<std::string> &boundaries,
                    const std::vector<std::vector<IntervalRow>> &lorentzian,
                    const std::vector<std::vector<IntervalRow>> &gaussian, const double eta,
                    const double sigma)
  {
    std::ostringstream data;
    const std::size_t  n = lorentzian.empty() ? 0 : lorentzian[0].size();
    for (std::size_t i = 0; i < n; ++i)
      {
        data << num(lorentzian[0][i].energy);
        for (std::size_t b = 0; b < boundaries.size(); ++b)
          {
            const auto &l  = lorentzian[b][i];
            const auto &g  = gaussian[b][i];
            const bool  ok = l.complete;
            data << ' ' << num(ok ? l.mean : nan) << ' ' << num(ok ? l.mean - l.standard_error : nan)
                 << ' ' << num(ok ? l.mean + l.standard_error : nan) << ' '
                 << num(g.complete ? g.mean : nan);
          }
        data << '\n';
      }
    std::ostringstream plot;
    plot << "set xlabel " << gnuplot_string(maker.energy_label()) << "\n"
         << "set ylabel " << gnuplot_string("DOS ρ(E) (" + maker.dos_unit() + ")") << "\n"
         << "plot ";
    for (std::size_t b = 0; b < boundaries.size(); ++b)
      {
        const std::size_t c = 2 + 4 * b;
        const std::string col = colour(boundaries[b]);
        plot << (b ? ", \\\n     " : "") << "data using 1:" << c + 1 << ":" << c + 2
             << " with filledcurves fc rgb '" << col
             << "' fs transparent solid 0.25 noborder notitle, \\\n     data using 1:" << c
             << " with lines lw 2 lc rgb '" << col << "' title "
             << gnuplot_string(legend_name(boundaries[b]) + ", Lorentzian η = " + short_number(eta, 3))
             << ", \\\n     data using 1:" << c + 3 << " with lines dt 2 lw 1.5 lc rgb '" << col
             << "' title "
             << gnuplot_string(legend_name(boundaries[b]) + ", Gaussian σ = " + short_number(sigma, 3));
      }
    plot << "\n";
    const std::string caption =
      "Density of states averaged over realisations: Lorentzian broadening "
      "−(1/π) Im tr(H − E − iη)⁻¹/|Λ| (solid, band ±1 standard error) and Gaussian broadening "
      "(dashed). Curves stop where the broadening kernel reaches above the computed part of some "
      "realisation's spectrum. Peaks narrower than the box's level spacing pattern are "
      "box-quantisation modes of the finite box, not features of the material's density of "
      "states; they shrink as L grows.";
    return maker.make("dos", "Density of states", caption, data.str(), plot.str());
  }

  Figure lifshitz_figure(FigureMaker &maker, const std::vector<std::string> &boundaries,
                         const std::vector<std::vector<GridValue>> &ids,
                         const std::vector<TailFit> &fits, const double e0,
                         const double cell_volume)
  {
    std::ostringstream data;
    const std::size_t  n = ids.empty() ? 0 : ids[0].size();
    for (std::size_t i = 0; i < n; ++i)
      {
        const double e = ids[0][i].energy;
        if (!(e > e0))
          continue;
        data << num(std::log(e - e0));
        for (std::size_t b = 0; b < boundaries.size(); ++b)
          {
            const auto  &g  = ids[b][i];
            const double m  = g.mean * cell_volume;
            const bool   ok = g.complete && m > 0 && m < 1 && g.standard_error > 0;
            data << ' ' << num(ok ? std::log(-std::log(m)) : nan) << ' '
                 << num(ok ? g.standard_error * cell_volume / (m * std::abs(std::log(m))) : nan);
          }
        data << '\n';
      }
    std::ostringstream plot, caption;
    plot << "set xlabel 'ln(E − E₀)  (E in the energy unit of the study)'\n"
         << "set ylabel 'ln(−ln n(E)),  n = IDS per unit cell'\n";
    for (std::size_t b = 0; b < fits.size(); ++b)
      if (std::isfinite(fits[b].slope) && fits[b].window_high > e0)
        plot << "f" << b << "(x) = (x >= " << num(std::log(std::max(fits[b].window_low, e0) - e0))
             << " && x <= " << num(std::log(fits[b].window_high - e0)) << ") ? "
             << num(fits[b].intercept) << " + " << num(fits[b].slope) << "*x : NaN\n";
    plot << "plot ";
    for (std::size_t b = 0; b < boundaries.size(); ++b)
      {
        const std::string col = colour(boundaries[b]);
        plot << (b ? ", \\\n     " : "") << "data using 1:" << 2 + 2 * b << ":" << 3 + 2 * b
             << " with yerrorbars pt 7 ps 0.6 lc rgb '" << col << "' title "
             << gnuplot_string(legend_name(boundaries[b]));
        // An unresolved fit is not drawn: its slope would read as a result.
        if (fits[b].resolved && std::isfinite(fits[b].slope) && fits[b].window_high > e0)
          {
            plot << ", \\\n     f" << b << "(x) with lines lw 2 lc rgb '" << col << "' title "
                 << gnuplot_string("fit, slope " + short_number(fits[b].slope, 3));
            caption << legend_name(boundaries[b]) << ": slope " << short_number(fits[b].slope, 3) << " ["
                    << short_number(fits[b].slope_low, 3) << ", "
                    << short_number(fits[b].slope_high, 3) << "]. ";
          }
        else
          caption << legend_name(boundaries[b]) << ": no fit drawn, not resolved ("
                  << (fits[b].reason.empty() ? std::string("no usable window") : fits[b].reason)
                  << "). ";
      }
    plot << "\n";
    const double expected = fits.empty() ? 0.0 : fits[0].expected_slope;
    return maker.make("lifshitz", "Lifshitz tail: ln(−ln n) against ln(E − E₀)",
                      "Bottom of the spectrum, E₀ = " + short_number(e0) +
                        ". Lines: weighted least-squares fits over the Lifshitz window. " +
                        caption.str() + "Asymptotic Lifshitz slope −d/2 = " + short_number(expected) +
                        " (Lifshitz 1964; Kirsch & Martinelli 1983).",
                      data.str(), plot.str());
  }

  Figure deep_tail_figure(FigureMaker &maker, const std::vector<std::string> &boundaries,
                          const std::vector<std::vector<IdsAccumulator::Row>> &rows,
                          const std::vector<DeepTailFit> &fits, const double e0,
                          const double cell_volume, const unsigned int dimension,
                          const double confidence)
  {
    const double       z = normal_quantile(0.5 + confidence / 2);
    std::ostringstream data;
    const std::size_t  n = rows.empty() ? 0 : rows[0].size();
    // The lowest positive bound drawn: bars whose interval reaches 0 end there.
    double floor = std::numeric_limits<double>::infinity();
    for (const auto &r : rows)
      for (const auto &x : r)
        if (x.complete && x.mean > 0)
          floor = std::min(floor, std::max(x.mean - z * x.standard_error, 0.0) > 0 ?
                                    x.mean - z * x.standard_error : x.mean / 10);
    for (std::size_t i = 0; i < n; ++i)
      {
        data << num(rows[0][i].energy);
        for (const auto &r : rows)
          {
            const auto &x  = r[i];
            const bool  ok = x.complete && x.mean > 0;
            const double low = x.mean - z * x.standard_error;
            data << ' ' << num(ok ? x.mean : nan) << ' ' << num(ok ? (low > 0 ? low : floor) : nan)
                 << ' ' << num(ok ? x.mean + z * x.standard_error : nan);
          }
        data << '\n';
      }
    std::ostringstream plot, caption;
    plot << "set logscale y\n"
         << "set format y '%.0e'\n"
         << "set xlabel " << gnuplot_string(maker.energy_label()) << "\n"
         << "set ylabel " << gnuplot_string("N(E) (" + maker.ids_unit() + "), log scale") << "\n"
         << "set key outside right top\n";
    for (std::size_t b = 0; b < fits.size(); ++b)
      if (fits[b].fitted)
        plot << "g" << b << "(x) = (x >= " << num(fits[b].window_low)
             << " && x <= " << num(fits[b].window_high) << ") ? exp(" << num(fits[b].intercept_b)
             << " - " << num(fits[b].constant_b) << "*(x - " << num(e0) << ")**(-"
             << num(0.5 * dimension) << "))/" << num(cell_volume) << " : NaN\n";
    plot << "set samples 400\nplot ";
    for (std::size_t b = 0; b < boundaries.size(); ++b)
      {
        const std::string col = colour(boundaries[b]);
        plot << (b ? ", \\\n     " : "") << "data using 1:" << 2 + 3 * b << ":" << 3 + 3 * b
             << ":" << 4 + 3 * b << " with yerrorbars pt 7 ps 0.6 lc rgb '" << col << "' title "
             << gnuplot_string(legend_name(boundaries[b]));
        if (b < fits.size() && fits[b].fitted)
          {
            plot << ", \\\n     g" << b << "(x) with lines lw 2 lc rgb '" << col << "' title "
                 << gnuplot_string("fit a − C (E−E₀)^(−d/2), " + legend_name(boundaries[b]));
            caption << legend_name(boundaries[b]) << ": exponent " << short_number(fits[b].exponent_a, 3)
                    << " [" << short_number(fits[b].exponent_a_low, 3) << ", "
                    << short_number(fits[b].exponent_a_high, 3) << "] from ln(−ln n), "
                    << (fits[b].asymptotic ? "consistent with d/2" : "not asymptotic") << ". ";
          }
        else if (b < fits.size())
          caption << legend_name(boundaries[b]) << ": no fit (" << fits[b].reason << "). ";
      }
    plot << "\n";
    return maker.make("deep_tail", "Deep band tail: ln N against E",
                      "Points: N(E) with the normal interval at confidence " +
                        short_number(confidence) +
                        " (bars reaching the frame's bottom: the interval reaches 0). Lines: "
                        "ln n = a − C (E − E₀)^(−d/2) fitted over the deep-tail window, E₀ = " +
                        short_number(e0) + ". " + caption.str() +
                        "Expected exponent d/2 = " + short_number(0.5 * dimension) + ".",
                      data.str(), plot.str());
  }

  Figure urbach_figure(FigureMaker &maker, const std::vector<std::string> &boundaries,
                       const std::vector<std::vector<IntervalRow>> &gaussian,
                       const std::vector<TailFit> &fits)
  {
    std::ostringstream data;
    const std::size_t  n = gaussian.empty() ? 0 : gaussian[0].size();
    std::vector<double> peak(boundaries.size(), 0.0);
    for (std::size_t b = 0; b < boundaries.size(); ++b)
      for (const auto &r : gaussian[b])
        if (r.complete)
          peak[b] = std::max(peak[b], r.mean);
    for (std::size_t i = 0; i < n; ++i)
      {
        data << num(gaussian[0][i].energy);
        for (std::size_t b = 0; b < boundaries.size(); ++b)
          {
            const auto &r = gaussian[b][i];
            // Far below the spectrum the Gaussian kernel's own tail dominates: not shown.
            const bool ok = r.complete && r.mean > 1e-8 * peak[b];
            data << ' ' << num(ok ? std::log(r.mean) : nan) << ' '
                 << num(ok && r.standard_error > 0 ? r.standard_error / r.mean : nan);
          }
        data << '\n';
      }
    std::ostringstream plot, caption;
    plot << "set xlabel " << gnuplot_string(maker.energy_label()) << "\n"
         << "set ylabel 'ln ρ(E)  (Gaussian-broadened DOS)'\n";
    // Show the window with as much again on either side: the tail, not the whole band.
    if (!fits.empty() && fits[0].window_high > fits[0].window_low)
      {
        // Not below the first energy where any curve has data (no empty margin).
        double first = fits[0].window_high;
        for (std::size_t i = 0; i < n; ++i)
          for (std::size_t b = 0; b < boundaries.size(); ++b)
            if (gaussian[b][i].complete && gaussian[b][i].mean > 0)
              first = std::min(first, gaussian[b][i].energy);
        const double w = fits[0].window_high - fits[0].window_low;
        plot << "set xrange [" << num(std::max(fits[0].window_low - w, first)) << ":"
             << num(fits[0].window_high + w) << "]\n";
      }
    for (std::size_t b = 0; b < fits.size(); ++b)
      if (std::isfinite(fits[b].slope))
        plot << "g" << b << "(x) = (x >= " << num(fits[b].window_low)
             << " && x <= " << num(fits[b].window_high) << ") ? " << num(fits[b].intercept)
             << " + " << num(fits[b].slope) << "*(x - " << num(fits[b].reference_energy)
             << ") : NaN\n";
    plot << "plot ";
    for (std::size_t b = 0; b < boundaries.size(); ++b)
      {
        const std::string col = colour(boundaries[b]);
        plot << (b ? ", \\\n     " : "") << "data using 1:" << 2 + 2 * b << ":" << 3 + 2 * b
             << " with yerrorbars pt 7 ps 0.5 lc rgb '" << col << "' title "
             << gnuplot_string(legend_name(boundaries[b]));
        if (fits[b].resolved && std::isfinite(fits[b].slope))
          {
            plot << ", \\\n     g" << b << "(x) with lines lw 2 lc rgb '" << col << "' title "
                 << gnuplot_string("fit, E_U = " + short_number(fits[b].urbach_energy, 3));
            caption << legend_name(boundaries[b]) << ": E_U = " << short_number(fits[b].urbach_energy, 3)
                    << " [" << short_number(fits[b].urbach_low, 3) << ", "
                    << short_number(fits[b].urbach_high, 3) << "]. ";
          }
        else
          caption << legend_name(boundaries[b]) << ": no fit drawn, not resolved ("
                  << (fits[b].reason.empty() ? std::string("no usable window") : fits[b].reason)
                  << "). ";
      }
    plot << "\n";
    return maker.make("urbach", "Urbach tail: ln ρ(E) below the band edge",
                      "Fit ln ρ = a + (E − E_ref)/E_U over the Urbach window. " + caption.str(),
                      data.str(), plot.str());
  }

  namespace
  {
    /** Bin centres and means with errors, one pair of columns per boundary. */
    std::string bin_table(const std::vector<std::vector<BinRow>> &bins, std::size_t min_count)
    {
      std::ostringstream data;
      const std::size_t  n = bins.empty() ? 0 : bins[0].size();
      for (std::size_t i = 0; i < n; ++i)
        {
          data << num(0.5 * (bins[0][i].lower + bins[0][i].upper));
          for (const auto &b : bins)
            {
              const bool ok = b[i].count >= min_count;
              data << ' ' << num(ok ? b[i].mean : nan) << ' '
                   << num(ok ? b[i].standard_error : nan);
            }
          data << '\n';
        }
      return data.str();
    }

    std::string bin_plot(const std::vector<std::string> &boundaries)
    {
      std::ostringstream plot;
      for (std::size_t b = 0; b < boundaries.size(); ++b)
        plot << (b ? ", \\\n     " : "") << "data using 1:" << 2 + 2 * b << ":" << 3 + 2 * b
             << " with yerrorlines pt 7 ps 0.7 lw 1.5 lc rgb '" << colour(boundaries[b])
             << "' title " << gnuplot_string(legend_name(boundaries[b]));
      return plot.str();
    }

    /** Bins with fewer values are not drawn (common practice, no source). */
    constexpr std::size_t min_bin_count = 20;
  } // namespace

  Figure ipr_figure(FigureMaker &maker, const std::vector<std::string> &boundaries,
                    const std::vector<std::vector<BinRow>> &bins, const double volume,
                    const double cell_volume)
  {
    // Both reference levels and all means inside the frame, with a margin.
    double top = 1.0 / cell_volume, bottom = 1.0 / volume;
    for (const auto &b : bins)
      for (const auto &r : b)
        if (r.count >= min_bin_count && r.mean > 0)
          top = std::max(top, r.mean), bottom = std::min(bottom, r.mean);
    std::ostringstream plot;
    plot << "set yrange [" << num(bottom / 3) << ":" << num(top * 3) << "]\n"
         << "set xlabel " << gnuplot_string(maker.energy_label()) << "\n"
         << "set ylabel 'mean IPR ∫|ψ|⁴/(∫|ψ|²)²  (1/volume)'\nset logscale y\n"
         << "plot " << bin_plot(boundaries) << ", \\\n     " << num(1.0 / volume)
         << " with lines dt 3 lc rgb 'gray40' title '1/|Λ| (spread over the box)', \\\n     "
         << num(1.0 / cell_volume)
         << " with lines dt 2 lc rgb 'gray40' title '1/a^d (one cell)'\n";
    return maker.make("ipr", "Inverse participation ratio against energy",
                      "Mean inverse participation ratio of the eigenfunctions per energy bin "
                      "(error bars: standard error; bins with fewer than " +
                        std::to_string(min_bin_count) +
                        " states left out). Large values: localised states.",
                      bin_table(bins, min_bin_count), plot.str());
  }

  Figure ratio_figure(FigureMaker &maker, const std::vector<std::string> &boundaries,
                      const std::vector<std::vector<BinRow>> &bins)
  {
    std::ostringstream plot;
    plot << "set xlabel " << gnuplot_string(maker.energy_label()) << "\n"
         << "set ylabel 'mean spacing ratio ⟨r⟩'\nset yrange [0:*]\n"
         << "plot " << bin_plot(boundaries) << ", \\\n     " << num(spacing_ratio_poisson)
         << " with lines dt 2 lw 1.5 lc rgb 'black' title 'Poisson 2 ln 2 − 1 ≈ 0.386', \\\n     "
         << num(spacing_ratio_goe)
         << " with lines dt 4 lw 1.5 lc rgb 'gray30' title 'GOE ≈ 0.531'\n";
    return maker.make("level_statistics", "Level statistics: mean ratio of consecutive spacings",
                      "⟨min(s_i, s_{i+1})/max(s_i, s_{i+1})⟩ per energy bin, pooled over "
                      "realisations (error bars: standard error; bins with fewer than " +
                        std::to_string(min_bin_count) +
                        " ratios left out). Reference values from Atas, Bogomolny, Giraud & Roux, "
                        "PRL 110, 084101 (2013): Poisson (localised) and GOE (extended).",
                      bin_table(bins, min_bin_count), plot.str());
  }

  Figure extrapolation_figure(FigureMaker &maker, const Columns &table,
                              const std::vector<std::string> &boundaries, const double confidence)
  {
    const auto        &energy = column(table, "energy");
    const double       z      = normal_quantile(0.5 + confidence / 2);
    std::ostringstream data;
    for (std::size_t i = 0; i < energy.size(); ++i)
      {
        data << num(energy[i]);
        for (const auto &bc : boundaries)
          {
            const double m = at(column(table, "n_infinity_" + bc), i);
            const double e = at(column(table, "stderr_" + bc), i);
            data << ' ' << num(m) << ' ' << num(m - z * e) << ' ' << num(m + z * e);
          }
        data << '\n';
      }
    std::ostringstream plot;
    plot << "set xlabel " << gnuplot_string(maker.energy_label()) << "\n"
         << "set ylabel " << gnuplot_string("extrapolated IDS N∞(E) (" + maker.ids_unit() + ")") << "\nplot ";
    for (std::size_t b = 0; b < boundaries.size(); ++b)
      {
        const std::size_t c = 2 + 3 * b;
        plot << (b ? ", \\\n     " : "") << "data using 1:" << c + 1 << ":" << c + 2
             << " with filledcurves fc rgb '" << colour(boundaries[b])
             << "' fs transparent solid 0.25 noborder notitle, \\\n     data using 1:" << c
             << " with lines lw 2 lc rgb '" << colour(boundaries[b]) << "' title "
             << gnuplot_string(legend_name(boundaries[b]) + " → L = ∞");
      }
    plot << "\n";
    return maker.make("extrapolation", "IDS extrapolated to infinite volume",
                      "Weighted least-squares fit N_L = N∞ + c/L over the box sizes, per energy "
                      "and boundary condition; band: interval at confidence " +
                        short_number(confidence) + ".",
                      data.str(), plot.str());
  }
} // namespace alloyspec
