/** @file results_store.h  The output folder: durable per-realisation records and final tables. */
#pragma once

#include <cstdint>
#include <map>
#include <string>
#include <vector>

namespace alloyspec
{
  /** Everything stored about one (realisation, boundary condition) solve. */
  struct RealisationRecord
  {
    std::uint64_t       realisation = 0;
    std::string         boundary;
    std::vector<double> eigenvalues;
    std::vector<double> residuals;
    /** Discretisation error bound per eigenvalue (error_estimate.h); NaN when not estimated. */
    std::vector<double> errors;
    std::vector<double> inverse_participation_ratios;
    /**
     * @f$\int_{\text{cell } 0}|\psi_j|^2 / \int|\psi_j|^2@f$ over the central unit
     * cell: summed over eigenvalues ≤ E and divided by the cell volume, the
     * local-trace estimator of the IDS, @f$E[\operatorname{tr}(\chi_0 P_{(-\infty,E]}\chi_0)]@f$.
     */
    std::vector<double> central_weights;
    /**
     * Guaranteed interval per eigenvalue (NaN where none was computed);
     * empty in folders of earlier versions.
     */
    std::vector<double> enclosure_lower, enclosure_upper;
    /** All eigenvalues ≤ this are listed: checked by an inertia count, or assumed (verified_by). */
    double              complete_up_to = 0;
    /** Negative pivots at complete_up_to; 0 and written as missing when verified_by is "enclosure". */
    std::uint64_t       inertia_count  = 0;
    /**
     * "inertia": an inertia count confirmed the list up to complete_up_to.
     * "enclosure": no count was made; the list's completeness up to
     * complete_up_to is the assumption of its enclosures.
     */
    std::string         verified_by = "inertia";
    double              potential_min  = 0;
    double              potential_max  = 0;
    double              solve_seconds  = 0;
    unsigned int        attempts       = 0;
    /**
     * @f$\ln w = \sum_n \ln p(q_n)/p_\theta(q_n)@f$, the log-likelihood ratio of
     * the realisation's cell values (sampling.h); 0 for plain sampling.
     */
    double              log_weight     = 0;

    /** Lines for eigenvalues.csv (one per eigenvalue, no header). */
    std::string eigenvalue_lines() const;
    /** One line for realisations.csv (no header). */
    std::string summary_line() const;
  };

  /**
   * An output folder. Records are appended to `eigenvalues.csv` and then
   * `realisations.csv`, each write flushed and fsync'ed, so a crash leaves at
   * most the remains of the last write at the ends of the files: a realisation
   * counts as stored only once its line in realisations.csv is complete. The
   * records are read back by read_stored_records() (record_reader.h). Write
   * failures (full disk, permissions) are InputError: the user can fix them
   * and resume.
   */
  class ResultsStore
  {
  public:
    /**
     * Energies in the records are in the solver's unit, the `reduced` unit
     * @f$\hbar^2/(2m^*\ell^2)@f$ of the `energy_reduced` columns (the user's
     * unit in a reduced-unit study), and their column names say so.
     */
    static constexpr const char *eigenvalue_header =
      "realisation,boundary,index,eigenvalue_reduced,residual,error_reduced,ipr,central_weight,"
      "enclosure_lower,enclosure_upper";
    static constexpr const char *summary_header =
      "realisation,boundary,n_eigenvalues,complete_up_to_reduced,inertia_count,"
      "potential_min_reduced,potential_max_reduced,solve_seconds,attempts,log_weight,verified_by";

    /**
     * The effective parameters of a study, in deal.II's short format, written
     * into its folder when it starts; `--resume` and `summarise` read them.
     */
    static constexpr const char *parameters_file = "as_run.prm";
    /** The name of that file in folders written by earlier versions; still read. */
    static constexpr const char *legacy_parameters_file = "parameters.prm";

    /**
     * Path of the stored parameter file in @p directory: parameters_file if it
     * exists, else legacy_parameters_file if that exists, else an empty string.
     */
    static std::string stored_parameters_path(const std::string &directory);

    /**
     * Opens @p directory for a new study: creates it if needed; throws
     * InputError if it already holds results of an earlier study (nothing is
     * deleted), unless @p resume is set, in which case the stored records are
     * kept and appended to.
     */
    ResultsStore(std::string directory, bool resume);

    const std::string &directory() const { return directory_; }
    /**
     * The text of the stored parameter file of study folder @p directory.
     * InputError (naming the file) if it is missing, not a file, unreadable,
     * or holds no parameter at all: an empty file would otherwise be read as
     * the defaults, a different model than the one stored.
     */
    static std::string read_stored_parameters(const std::string &directory);
    /** True if @p directory holds stored records (either CSV file). */
    static bool holds_records(const std::string &directory);
    /** A store for a folder that rank 0 has already checked and opened. */
    static ResultsStore attach(std::string directory);

    /**
     * InputError if the folder holds an earlier study's records or run.json.
     * Checked again once the folder is locked: another run may have filled it
     * between the constructor's check and the lock.
     */
    void refuse_earlier_study() const;
    /** True if the constructor created the folder (it did not exist before). */
    bool created_folder() const { return created_; }
    std::string        path(const std::string &file) const;

    /** Appends one record durably (write, flush, fsync). */
    void append(const RealisationRecord &record) const;
    /** Same, from already formatted lines (records gathered from other ranks). */
    void append_text(const std::string &eigenvalue_lines, const std::string &summary_lines) const;

    /**
     * Before a resume appends to the folder: reads the stored records strictly
     * (read_stored_records(), InputError if the folder is damaged) and cuts the
     * remains of an interrupted write from the ends of both files. Returns the
     * reader's warnings.
     */
    std::vector<std::string> prepare_resume() const;

    /** Writes @p content to @p file in the folder atomically (temporary file, fsync, rename). */
    void write_file(const std::string &file, const std::string &content) const;
    /** Same for any folder. */
    static void write_file_in(const std::string &directory, const std::string &file,
                              const std::string &content);

  private:
    ResultsStore() = default;
    std::string directory_;
    bool        created_ = false;
  };
} // namespace alloyspec
