/**
 * @file analysis.h  The analysis of stored spectra as the command-line driver
 * calls it: tables, tail fits, figures and report.html for one study, or for
 * several studies of different box sizes with the extrapolation to infinite
 * volume.
 */
#pragma once

#include <alloyspec/io/results_store.h>
#include <alloyspec/analysis/spectral_analysis.h>

#include <string>
#include <vector>

namespace alloyspec
{
  struct ReportContent;

  /** Plain data describing one study, as the driver has it after a run or from a folder. */
  struct AnalysisInput
  {
    unsigned int              dimension = 3;
    double                    volume    = 0; ///< |Λ| in length unit^d
    std::vector<unsigned int> cells;         ///< L1, …, L_d
    double                    cell_size = 1; ///< a
    std::vector<std::string>  boundaries;    ///< "dirichlet", "neumann", "periodic"
    std::vector<double>       energies;      ///< the study's energy grid
    double                    band_bottom    = 0; ///< E0 = min of the law's support
    double                    mean_potential = 0; ///< E[q], band edge of the averaged potential
    std::string               energy_unit = "E (reduced units, ħ²/2m = 1, length = cell)";
    /**
     * Header of the energy column of the tables: "energy" in reduced units,
     * "energy_eV" / "energy_meV" in physical units (see with_energy_columns()).
     */
    std::string               energy_column = "energy";
    /**
     * Physical units: one solver energy unit @f$\hbar^2/(2m^*\,\mathrm{nm}^2)@f$
     * (the unit of the stored records) in the user's unit; 0 in reduced units.
     */
    double                    solver_energy_unit = 0;
    /**
     * The potential is fixed (the `file` law): the report lists eigenvalues
     * instead of ensemble statistics (as it also does for one realisation).
     */
    bool                      fixed_potential = false;
    /** Factor between the stored error bounds and the Richardson estimate (solver layer's). */
    double                    error_safety_factor = 3.0;
    std::string               model_summary;   ///< one paragraph: model, law, box
    std::string               parameters_text; ///< effective parameters, shown verbatim
    /** The study folder (eigenfunction_slice_<bc>.csv of a fixed potential is read from it). */
    std::string               source_directory;
    std::vector<RealisationRecord> records;
    /**
     * ids.csv of the study (columns energy, ids_<bc>, stderr_<bc>, complete_<bc>,
     * semiclassical, …). Empty: `<output_dir>/ids.csv` if it exists; otherwise
     * the IDS figure is drawn from the records, without the semiclassical curve.
     */
    std::string ids_table;
  };

  /**
   * A CSV table whose first column is "energy" (values in the user's unit),
   * relabelled for @p input's units: unchanged in reduced units; in physical
   * units the column is renamed to input.energy_column (e.g. "energy_eV") and
   * followed by "energy_reduced", the same energy in solver units
   * @f$\hbar^2/(2m^*\,\mathrm{nm}^2)@f$ (the unit of eigenvalues.csv).
   * Tables read back with read_csv_columns() still find "energy".
   */
  std::string with_energy_columns(const std::string &csv, const AnalysisInput &input);

  /**
   * Analyses one study and writes into @p output_dir (created if needed):
   * - `ids_band.csv`: energy, then per boundary ids_<bc>, lower_<bc>, upper_<bc>
   *   (bootstrap percentile band), complete_<bc>;
   * - `dos.csv`: energy, then per boundary lorentzian_<bc>, lorentzian_stderr_<bc>,
   *   lorentzian_complete_<bc>, gaussian_<bc>, gaussian_stderr_<bc>, gaussian_complete_<bc>;
   * - `localisation.csv`: bin_low, bin_high, then per boundary ratio_<bc>,
   *   ratio_stderr_<bc>, ratio_count_<bc>, ipr_<bc>, ipr_stderr_<bc>, ipr_count_<bc>;
   * - `tails.json`: Lifshitz and Urbach fits per boundary, with windows,
   *   intervals, counts and whether the data resolve them;
   * - `figures/<name>.png` and `.svg` (with `.dat` and `.gp`), and `report.html`.
   * Warnings (e.g. gnuplot missing) are returned and also listed in the report.
   * Throws InputError on unusable input (no energies, non-positive volume).
   */
  std::vector<std::string> write_analysis(const std::string &output_dir, const AnalysisInput &input,
                                          const AnalysisSettings &settings);

  /**
   * Same, with @p report already holding content to show first (a box-size
   * series puts its own figures, tables and checks there).
   */
  std::vector<std::string> write_analysis(const std::string &output_dir, const AnalysisInput &input,
                                          const AnalysisSettings &settings, ReportContent report);

  /**
   * The unit of a density in the study's units, for axis labels and tables:
   * "nm⁻³" (IDS) or "eV⁻¹·nm⁻³" (DOS) in physical units, ℓ⁻ᵈ and ε⁻¹·ℓ⁻ᵈ with
   * ℓ the cell edge in reduced units.
   */
  std::string density_unit(const AnalysisInput &input, bool per_energy);
} // namespace alloyspec
