/**
 * @file study_model.h  The parsed model of a study, shared by every command:
 * the box, units, geometry, potential, discretisation, what to solve for, and
 * the sample of realisations.
 */
#pragma once

#include <alloyspec/app/spectrum_settings.h>
#include <alloyspec/app/study_settings.h>
#include <alloyspec/fe/discretisation.h>
#include <alloyspec/fe/geometry.h>
#include <alloyspec/model/lattice.h>
#include <alloyspec/model/potential_model.h>
#include <alloyspec/model/sampling.h>
#include <alloyspec/model/units.h>
#include <alloyspec/solver/eigen_solver.h>
#include <alloyspec/solver/error_estimate.h>

#include <cstdint>
#include <memory>
#include <string>
#include <utility>
#include <vector>

namespace dealii
{
  class ParameterHandler;
}

namespace alloyspec
{
  struct StoredStudy;
  struct AnalysisInput;

  /**
   * Everything a command needs to know about the model @f$H_\omega = -\Delta + V_\omega@f$
   * on its domain, parsed once from the parameter file. `run`, `count`,
   * `landscape`, `summarise` and `verify` each hold one, so the units, the
   * geometry and the energy grid cannot drift between commands.
   *
   * Subsections and their one owner each:
   * `lattice` (Lattice), `units` (UnitSystem), `potential` (PotentialModel),
   * `discretisation` (DiscretisationSettings), `spectrum` (SpectrumSettings),
   * `study` (StudySettings), `sampling` (SamplingSettings). `analysis` and
   * `landscape` belong to the
   * commands that use them (declare_all_parameters()).
   *
   * Two unit systems meet here: the user's (the parameter file, every table
   * and figure) and the solver's (@f$\hbar^2/(2m^*\,\mathrm{length}^2)@f$, the
   * matrices and the stored records). Conversions happen in this class only.
   */
  class StudyModel
  {
  public:
    /** Declares the subsections listed above. */
    static void declare_parameters(dealii::ParameterHandler &prm);
    /**
     * Reads them and checks what no single subsection can (e.g. periodic
     * directions with a mesh file); InputError naming the entry otherwise.
     */
    void parse_parameters(dealii::ParameterHandler &prm);

    const Lattice                &lattice() const { return lattice_; }
    const UnitSystem             &units() const { return units_; }
    const GeometrySettings       &geometry() const { return geometry_; }
    const PotentialModel         &potential() const { return potential_; }
    const DiscretisationSettings &discretisation() const { return discretisation_; }
    /** The settings chosen by a pilot for `discretisation/accuracy`. */
    void set_discretisation(const DiscretisationSettings &settings) { discretisation_ = settings; }
    ErrorEstimateSettings         error_estimate() const { return ErrorEstimateSettings(discretisation_); }
    /** Eigen-solver settings, the energy cutoff converted to solver units. */
    const EigenSolverSettings    &solver() const { return solver_; }
    const std::vector<Boundary>  &boundaries() const { return spectrum_.boundaries; }
    const StudySettings          &study() const { return study_; }
    const SamplingSettings       &sampling() const { return sampling_; }
    /** True when realisations are drawn from a tilted law (sampling.h). */
    bool                          tilted() const { return sampling_.is_tilted(); }
    /** Draws from now on with tilt @p theta (the automatic choice, or a stored study's). */
    void                          set_tilt(double theta);
    /**
     * The tilt the study stored in @p directory was run at: the parameter, or
     * for `sampling/tilt = auto` the choice kept in tilt_file; InputError when
     * that file is missing (the weights could not be reconstructed).
     */
    double                        stored_tilt(const std::string &directory) const;
    /** Where a run with `sampling/tilt = auto` keeps its choice (read on resume and by summarise). */
    static constexpr const char  *tilt_file = "tilt.txt";

    /** Cell values @f$q_n(\omega_r)@f$ of realisation @p r in solver units. */
    std::vector<double> solver_cell_values(std::uint64_t r) const;
    /**
     * The energy grid of `study/energies` in solver units; InputError naming
     * @p command when the grid is `auto` (it needs stored spectra).
     */
    std::vector<double> solver_energies(const std::string &command = "run") const;

    /**
     * The grid `study/energies = auto` makes for energies from @p lower to
     * @p upper (user unit): a step h of 1, 2, 2.5 or 5 times a power of ten,
     * the smallest with at most 200 intervals, and the points k h from the
     * multiple of h at or below @p lower to the last one at or below @p upper.
     * InputError when the range is empty or not finite.
     */
    static std::vector<double> spectrum_grid(double lower, double upper);

    /**
     * The range `auto` covers for the records stored in @p directory (user
     * unit): from the band bottom (or, for an unbounded law, the lowest
     * stored eigenvalue) to the lowest `complete_up_to` of any realisation.
     */
    std::pair<double, double> spectrum_range(const std::string &directory) const;

    /**
     * The discretisation of one solve with bracketing condition @p bracketing:
     * the box with its periodic directions, or the mesh file. @p halved: the
     * richer space of the error estimate (mesh size h/2: twice the elements
     * per cell, or one more refinement of the mesh).
     */
    std::unique_ptr<Discretisation> make_discretisation(Boundary bracketing, bool halved = false) const;
    /**
     * Whether `run` builds its meshes distributed over each team of ranks
     * (Discretisation::create_distributed): for the iterative solver
     * (`spectrum/solver = iterative`, or `auto` from `spectrum/auto
     * crossover` unknowns on) on a 2D or 3D box, with plain sampling, no
     * error estimate or accuracy target, and no eigenfunction export. The
     * other cases keep the serial mesh on every rank: their parts (the
     * richer space of the error estimate, the tilt's likelihood ratio over
     * all cells, VTU output, 1D) work on whole vectors.
     */
    bool distributed_mesh() const;
    /** The box of make_discretisation(@p bracketing) on a mesh distributed over @p comm. */
    std::unique_ptr<Discretisation> make_distributed_discretisation(Boundary bracketing,
                                                                    MPI_Comm comm) const;
    /**
     * make_discretisation() with its mesh, unknowns and fixed matrices made
     * (what count and landscape solve on; run times these phases one by one).
     */
    std::unique_ptr<Discretisation> assembled_discretisation(Boundary bracketing) const;

    /**
     * @f$|\Omega|@f$ and, per lattice cell, the volume that carries its value:
     * the box's, or the mesh's. @p made, if given, is a discretisation of this
     * model already set up (saves reading the mesh again).
     */
    std::pair<double, std::vector<double>> domain_volumes(const Discretisation *made = nullptr) const;

    /**
     * The complete records of this study's realisations stored in @p directory
     * (every boundary condition present; the strict reader's warnings printed),
     * in the user's unit, with everything needed to tabulate them (summary.h),
     * and the phase-space count @f$N_{sc}(E)@f$ of the same realisations
     * regenerated from the counter-based stream, weighted by @f$w_r@f$ when
     * tilted. @p parameters_prm: the stored parameter text. The energy grid
     * is @p grid if given (a grid shared by several folders), else that of
     * `study/energies` (with `auto`, spectrum_grid() over this folder's
     * spectrum_range()). InputError when no complete realisation is stored.
     */
    StoredStudy describe_stored(const std::string &directory, const std::string &parameters_prm,
                                const std::vector<double> *grid = nullptr) const;

    /** One study of a merge, as a component of the balance heuristic. */
    struct TiltComponent
    {
      double       theta = 0;          ///< θ_k (0 for plain)
      double       share = 0;          ///< n_k/n
      unsigned int window = 0;         ///< `sampling/tilt window` (0: every cell)
      double       untilted_share = 0; ///< `sampling/untilted share` (with a window)
    };

    /**
     * Gives the realisations of @p stored (drawn by this model at its stored
     * tilt) their balance-heuristic weights over the studies of a merge
     * (balance_log_weight(), model/tilt_mixture.h): @p mixture lists each
     * study's sampling law (its tilt θ_k, 0 for plain, and its tilt window)
     * and share n_k/n. The cell values are
     * regenerated, ℓ_k(q) computed at every θ_k, every record's log_weight and
     * the semiclassical sum replaced, and stored.tilt_mixture set.
     */
    void apply_tilt_mixture(StoredStudy &stored, const std::vector<TiltComponent> &mixture) const;

    /**
     * What the analysis needs to know of the model (box, boundaries, energy
     * grid and its unit, band bottom, a one-paragraph summary), without
     * records, for a domain of volume @p volume.
     */
    AnalysisInput analysis_input(double volume) const;

    /**
     * Phase-space count of realisation @p r at the grid energies,
     * @f$N_{sc}(E) = |\Omega|^{-1}\sum_n |\Omega_n|\,N_0(E - q_n)@f$ with
     * @f$N_0@f$ the free IDS and @f$|\Omega_n|@f$ the volume carrying cell n's
     * value (@p volumes from domain_volumes()).
     */
    std::vector<double> semiclassical_count(std::uint64_t r,
                                            const std::pair<double, std::vector<double>> &volumes) const;

    /**
     * InputError unless every cell value stays within the magnitude the
     * solver resolves (max_potential_magnitude solver units).
     */
    void check_potential_scale() const;

  private:
    Lattice                lattice_;
    UnitSystem             units_;
    GeometrySettings       geometry_;
    PotentialModel         potential_;
    DiscretisationSettings discretisation_;
    SpectrumSettings       spectrum_;
    EigenSolverSettings    solver_;
    StudySettings          study_;
    SamplingSettings       sampling_;
  };

  /** Every subsection of every command: StudyModel's, `analysis` and `landscape`. */
  void declare_all_parameters(dealii::ParameterHandler &prm);
} // namespace alloyspec
