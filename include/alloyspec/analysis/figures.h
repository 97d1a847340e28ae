/**
 * @file figures.h  Figures of an analysis, drawn by gnuplot: for each figure a
 * data file and a script are written to `<output>/figures/`, then
 * `/usr/bin/gnuplot script` is run (no shell) with terminals pngcairo and svg.
 * Without gnuplot the figures are skipped with a warning; the data files and
 * scripts stay, so the figures can be drawn later by hand.
 */
#pragma once

#include <alloyspec/analysis/spectral_analysis.h>
#include <alloyspec/analysis/deep_tail.h>
#include <alloyspec/analysis/tail_fits.h>

#include <map>
#include <string>
#include <vector>

namespace alloyspec
{
  /** Columns of a CSV file with a header line, by name. */
  using Columns = std::map<std::string, std::vector<double>>;

  /**
   * Reads a comma-separated table whose first line names the columns; empty
   * or non-numeric cells become NaN. Throws InputError naming the file when it
   * cannot be read or a row has the wrong number of cells.
   */
  Columns read_csv_columns(const std::string &path);

  /** One figure as made (or skipped). */
  struct Figure
  {
    std::string              name;    ///< file stem, e.g. "ids"
    std::string              title;
    std::string              caption; ///< what is drawn and how to read it
    std::vector<std::string> files;   ///< images written (absolute paths)
    /** No data to draw (fewer than two points with a value): omitted from the report. */
    bool empty = false;
  };

  /** Writes data and scripts, runs gnuplot, and collects warnings. */
  class FigureMaker
  {
  public:
    /**
     * @p directory receives the files (created if needed); @p formats ⊂ {png, svg};
     * @p energy_label labels energy axes, e.g. "E (reduced units, ħ²/2m = 1, length = cell)".
     */
    FigureMaker(std::string directory, std::vector<std::string> formats, std::string energy_label,
                std::string gnuplot = "/usr/bin/gnuplot");

    /** Whether the gnuplot executable exists and is executable. */
    bool available() const { return available_; }
    const std::string &energy_label() const { return energy_label_; }
    /** Units of densities on axes: the IDS (e.g. "nm⁻³") and the DOS (e.g. "eV⁻¹·nm⁻³"). */
    void set_density_units(std::string ids, std::string dos)
    {
      ids_unit_ = std::move(ids), dos_unit_ = std::move(dos);
    }
    const std::string &ids_unit() const { return ids_unit_; }
    const std::string &dos_unit() const { return dos_unit_; }
    const std::vector<std::string> &warnings() const { return warnings_; }

    /**
     * Writes @p data to `name.dat` and a script that sets the common style,
     * then for each format the terminal and output, then @p commands (which
     * refer to the data file as `data`), and runs it.
     */
    Figure make(const std::string &name, const std::string &title, const std::string &caption,
                const std::string &data, const std::string &commands);

  private:
    std::string              directory_;
    std::vector<std::string> formats_;
    std::string              energy_label_;
    std::string              ids_unit_ = "per unit volume";
    std::string              dos_unit_ = "per unit volume per unit energy";
    std::string              gnuplot_;
    bool                     available_ = false;
    std::vector<std::string> warnings_;
  };

  /** Quotes @p text as a gnuplot single-quoted string (' doubled). */
  std::string gnuplot_string(const std::string &text);

  /**
   * A boundary condition ("dirichlet", "neumann", "periodic") as legends and
   * captions name it: Dirichlet and Neumann capitalised, "periodic" as it is.
   */
  std::string legend_name(const std::string &boundary);

  /**
   * IDS per boundary with its band, and the semiclassical count, from an ids.csv
   * table (columns read by name: energy, ids_<bc>, stderr_<bc>, complete_<bc>,
   * semiclassical). Band columns lower_<bc>/upper_<bc>, if present, are drawn;
   * otherwise mean ± z·stderr. Incomplete points are left out.
   */
  Figure ids_figure(FigureMaker &maker, const Columns &ids,
                    const std::vector<std::string> &boundaries, double confidence);

  /** Broadened DOS per boundary: Lorentzian with ±1 standard error band, Gaussian dashed. */
  Figure dos_figure(FigureMaker &maker, const std::vector<std::string> &boundaries,
                    const std::vector<std::vector<IntervalRow>> &lorentzian,
                    const std::vector<std::vector<IntervalRow>> &gaussian, double eta,
                    double sigma);

  /** ln(−ln n) against ln(E − E0) with error bars, the fitted lines and slope −d/2 for reference. */
  Figure lifshitz_figure(FigureMaker &maker, const std::vector<std::string> &boundaries,
                         const std::vector<std::vector<GridValue>> &ids,
                         const std::vector<TailFit> &fits, double e0, double cell_volume);

  /**
   * The deep tail: N(E) per unit volume on a logarithmic axis (so ln N against
   * E) with the interval of tail.csv as error bars, N̂ ± z·SE cut at 0 (a bar
   * whose interval reaches 0 is drawn down to the frame), and the form-B fit
   * @f$N = e^{a - C (E-E_0)^{-d/2}}/a^d@f$ over its window.
   */
  Figure deep_tail_figure(FigureMaker &maker, const std::vector<std::string> &boundaries,
                          const std::vector<std::vector<IdsAccumulator::Row>> &rows,
                          const std::vector<DeepTailFit> &fits, double e0, double cell_volume,
                          unsigned int dimension, double confidence);

  /** ln ρ (Gaussian-broadened) against E with the fitted Urbach lines. */
  Figure urbach_figure(FigureMaker &maker, const std::vector<std::string> &boundaries,
                       const std::vector<std::vector<IntervalRow>> &gaussian,
                       const std::vector<TailFit> &fits);

  /**
   * Mean IPR per energy bin (log scale), with standard errors, and the two
   * reference levels 1/|Λ| (constant over the box) and 1/a^d (one cell).
   */
  Figure ipr_figure(FigureMaker &maker, const std::vector<std::string> &boundaries,
                    const std::vector<std::vector<BinRow>> &bins, double volume,
                    double cell_volume);

  /** ⟨r⟩ per energy bin with the Poisson and GOE reference lines (Atas et al. 2013). */
  Figure ratio_figure(FigureMaker &maker, const std::vector<std::string> &boundaries,
                      const std::vector<std::vector<BinRow>> &bins);

  /** Extrapolated IDS N∞(E) per boundary with intervals (several box sizes). */
  Figure extrapolation_figure(FigureMaker &maker, const Columns &extrapolation,
                              const std::vector<std::string> &boundaries, double confidence);
} // namespace alloyspec
