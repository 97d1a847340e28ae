#include <alloyspec/analysis/spectral_analysis.h>
#include <alloyspec/analysis/summary.h>
#include <alloyspec/app/study_model.h>
#include <alloyspec/model/tilt_mixture.h>
#include <alloyspec/core/errors.h>
#include <alloyspec/core/format.h>
#include <alloyspec/io/record_reader.h>
#include <alloyspec/io/parameter_text.h>
#include <alloyspec/io/results_store.h>
#include <alloyspec/model/weyl_law.h>
#include <alloyspec/solver/direct_path_model.h>
#include <alloyspec/solver/landscape.h>

#include <deal.II/base/parameter_handler.h>

#include <algorithm>
#include <cmath>
#include <filesystem>
#include <fstream>
#include <iostream>
#include <limits>
#include <map>
#include <numeric>
#include <set>
#include <sstream>

namespace alloyspec
{
  namespace
  {
    /**
     * Largest magnitude of a cell value in solver units. Rounding in the
     * factorisations of K - sigma M is about 2e-16 max|q| in absolute terms; at
     * 1e6 that is 2e-10, below the level spacing of any box that fits in
     * memory. Beyond it the shifted solves lose the spectrum (a potential of
     * 1e308 overflowed, 1e8 broke the fits), and physically a cell of 1e6
     * (decay e^-1000 across a unit cell) is already an impenetrable wall.
     * Common practice, no source.
     */
    constexpr double max_potential_magnitude = 1e6;

    /**
     * N_sc of one realisation drawn from @p potential, in solver units (a
     * density per unit volume does not depend on the energy unit); each cell
     * weighs with the volume of the domain that carries its value (all alike
     * in a box, the mesh's share otherwise).
     */
    std::vector<double> phase_space_count(const std::vector<double>                    &q,
                                          const std::vector<double>                    &energies,
                                          unsigned int                                  dim,
                                          const std::pair<double, std::vector<double>> &volumes)
    {
      const auto &[volume, cell_volumes] = volumes;
      std::vector<double> counts(energies.size(), 0.0);
      for (std::size_t i = 0; i < energies.size(); ++i)
        {
          double sum = 0;
          for (std::size_t n = 0; n < q.size(); ++n)
            if (cell_volumes[n] > 0)
              sum += cell_volumes[n] * free_ids_density(dim, energies[i] - q[n]);
          counts[i] = sum / volume;
        }
      return counts;
    }

    /**
     * From the band bottom (or, for an unbounded law, the lowest stored
     * eigenvalue) to the lowest energy up to which some realisation's list
     * is verified complete: every realisation counts exactly there.
     */
    std::pair<double, double> verified_range(const std::vector<RealisationRecord> &records,
                                             const double                          bottom)
    {
      double lowest = std::numeric_limits<double>::infinity();
      double upper  = std::numeric_limits<double>::infinity();
      for (const auto &r : records)
        {
          if (!r.eigenvalues.empty())
            lowest = std::min(lowest, r.eigenvalues.front());
          if (std::isfinite(r.complete_up_to))
            upper = std::min(upper, r.complete_up_to);
        }
      return {std::isfinite(bottom) ? bottom : lowest, upper};
    }
  } // namespace

  void StudyModel::declare_parameters(dealii::ParameterHandler &prm)
  {
    Lattice::declare_parameters(prm);
    UnitSystem::declare_parameters(prm);
    PotentialModel::declare_parameters(prm);
    DiscretisationSettings::declare_parameters(prm);
    SpectrumSettings::declare_parameters(prm);
    StudySettings::declare_parameters(prm);
    SamplingSettings::declare_parameters(prm);
  }

  void declare_all_parameters(dealii::ParameterHandler &prm)
  {
    StudyModel::declare_parameters(prm);
    LandscapeSettings::declare_parameters(prm);
    AnalysisSettings::declare_parameters(prm);
  }

  void StudyModel::parse_parameters(dealii::ParameterHandler &prm)
  {
    lattice_.parse_parameters(prm);
    units_.parse_parameters(prm, lattice_);
    spectrum_.parse_parameters(prm);
    geometry_.configure(lattice_, spectrum_.periodic_directions);
    potential_.parse_parameters(prm, lattice_);
    discretisation_.parse_parameters(prm);
    if (discretisation_.accuracy && geometry_.has_mesh())
      throw InputError("parameter 'discretisation/accuracy': not available with 'lattice/mesh file' "
                       "(allowed there: empty; set the degree and refinements directly)");
    // The cutoff is given in the user's energy unit, the solver works in its own.
    solver_ = spectrum_.solver;
    if (solver_.energy_cutoff)
      solver_.energy_cutoff = units_.to_solver_energy(*solver_.energy_cutoff);
    study_.parse_parameters(prm);
    sampling_.parse_parameters(prm);
    if (sampling_.is_tilted())
      {
        if (!potential_.is_random())
          throw InputError("sampling/method = tilted needs a random law; potential/law = file "
                           "gives one fixed potential (use sampling/method = plain)");
        if (!sampling_.automatic)
          potential_.set_tilt(sampling_.tilt);
        potential_.set_tilt_window(sampling_.tilt_window, sampling_.untilted_share);
      }
    if (geometry_.has_mesh())
      for (const Boundary bc : spectrum_.boundaries)
        if (bc == Boundary::periodic)
          throw InputError("parameter 'spectrum/boundary conditions': 'periodic' is not allowed "
                           "with 'lattice/mesh file' (allowed: dirichlet, neumann)");
    check_potential_scale();
  }

  void StudyModel::set_tilt(const double theta)
  {
    sampling_.tilt = theta;
    potential_.set_tilt(theta);
  }

  double StudyModel::stored_tilt(const std::string &directory) const
  {
    if (!sampling_.automatic)
      return sampling_.tilt;
    const auto    path = std::filesystem::path(directory) / tilt_file;
    std::ifstream in(path);
    double        theta = 0;
    if (!(in >> theta) || !std::isfinite(theta))
      throw InputError("folder '" + directory + "': sampling/tilt = auto, but " + tilt_file +
                       " (the tilt the study chose) is missing or unreadable; the weights "
                       "cannot be reconstructed");
    return theta;
  }

  void StudyModel::check_potential_scale() const
  {
    double low = 0, high = 0;
    if (potential_.is_random())
      {
        const SingleSiteLaw &law = *potential_.law();
        low                      = law.support_min();
        high                     = law.support_max();
        if (!std::isfinite(low) || !std::isfinite(high))
          {
            // An untruncated gaussian: 8 standard deviations hold all but 1e-15.
            const double spread = 8.0 * std::sqrt(law.variance());
            low                 = law.mean() - spread;
            high                = law.mean() + spread;
          }
      }
    else
      {
        const std::vector<double> q = potential_.cell_values(study_.seed, 0);
        const auto [lo, hi]         = std::minmax_element(q.begin(), q.end());
        low                         = *lo;
        high                        = *hi;
      }
    const double magnitude =
      std::max(std::abs(units_.to_solver_energy(low)), std::abs(units_.to_solver_energy(high)));
    if (!(magnitude <= max_potential_magnitude))
      {
        std::ostringstream message;
        message << "subsection 'potential' (" << potential_.description()
                << "): the cell values reach " << low << " to " << high
                << ", allowed are magnitudes up to "
                << units_.to_user_energy(max_potential_magnitude) << " (" << max_potential_magnitude
                << " solver units); beyond that rounding in the factorisations swamps the level "
                   "spacings, and a cell that high is already an impenetrable wall";
        throw InputError(message.str());
      }
  }

  std::unique_ptr<Discretisation> StudyModel::make_discretisation(const Boundary bracketing,
                                                                  const bool     halved) const
  {
    if (geometry_.has_mesh())
      return Discretisation::create_from_mesh(lattice_, discretisation_, geometry_.mesh_file,
                                              geometry_.mesh_refinements + (halved ? 1 : 0),
                                              bracketing);
    return Discretisation::create(lattice_,
                                  halved ? richer_settings(discretisation_, RicherSpace::mesh) :
                                           discretisation_,
                                  geometry_.conditions(bracketing, lattice_.dimension()));
  }

  bool StudyModel::distributed_mesh() const
  {
    if (lattice_.dimension() < 2 || geometry_.has_mesh() || sampling_.is_tilted() ||
        error_estimate().enabled() || discretisation_.accuracy || !study_.export_eigenfunctions.empty())
      return false;
    if (solver_.method == "iterative")
      return true;
    if (solver_.method != "auto")
      return false;
    const unsigned int k = solver_.energy_cutoff ? solver_.max_eigenvalues : solver_.n_eigenvalues;
    return estimate_direct_path(lattice_.cells(), discretisation_.degree,
                                discretisation_.elements_per_cell, k)
             .dofs >= solver_.auto_crossover;
  }

  std::unique_ptr<Discretisation> StudyModel::make_distributed_discretisation(const Boundary bracketing,
                                                                              MPI_Comm comm) const
  {
    return Discretisation::create_distributed(
      lattice_, discretisation_, geometry_.conditions(bracketing, lattice_.dimension()), comm);
  }

  std::unique_ptr<Discretisation> StudyModel::assembled_discretisation(const Boundary bracketing) const
  {
    auto d = make_discretisation(bracketing);
    d->make_grid();
    d->setup_system();
    d->assemble_fixed();
    return d;
  }

  std::vector<double> StudyModel::solver_cell_values(const std::uint64_t realisation) const
  {
    return units_.to_solver_energies(potential_.cell_values(study_.seed, realisation));
  }

  std::vector<double> StudyModel::solver_energies(const std::string &command) const
  {
    if (study_.energies_from_spectrum)
      throw InputError("parameter 'study/energies' = auto: that grid follows the verified spectra "
                       "of 'alloyspec run', which the " + command + " command does not compute "
                       "(allowed here: a range 'start to stop by step' or a list 'E1, E2, ...')");
    return units_.to_solver_energies(study_.energies);
  }

  std::pair<double, std::vector<double>> StudyModel::domain_volumes(const Discretisation *made) const
  {
    if (!geometry_.has_mesh())
      return {lattice_.volume(),
              std::vector<double>(lattice_.n_cells(),
                                  std::pow(lattice_.cell_size(), double(lattice_.dimension())))};
    if (made)
      return {made->volume(), made->cell_volumes()};
    // Nothing was solved here (summarise, count): reading the mesh is cheap.
    auto d = make_discretisation(Boundary::neumann);
    d->make_grid();
    d->setup_system();
    return {d->volume(), d->cell_volumes()};
  }

  AnalysisInput StudyModel::analysis_input(const double volume) const
  {
    AnalysisInput in;
    in.dimension      = lattice_.dimension();
    in.volume         = volume;
    in.cells          = lattice_.cells();
    in.cell_size      = lattice_.cell_size();
    for (const Boundary bc : spectrum_.boundaries)
      in.boundaries.push_back(to_string(bc));
    in.energies        = study_.energies;
    in.band_bottom     = potential_.bottom();
    in.fixed_potential = !potential_.is_random();
    in.error_safety_factor = safety_factor;
    in.mean_potential  = potential_.is_random() ? potential_.law()->mean() : 0.0;
    if (!potential_.is_random())
      {
        const std::vector<double> q = potential_.cell_values(study_.seed, 0);
        in.mean_potential = std::accumulate(q.begin(), q.end(), 0.0) / q.size();
      }
    in.model_summary   = "H = -Laplacian + V on " + lattice_.description() + "; " +
                       potential_.description() + "; FE_Q(" +
                       std::to_string(discretisation_.degree) + ") with " +
                       std::to_string(discretisation_.elements_per_cell) +
                       " elements per cell edge.";
    if (geometry_.has_mesh())
      in.model_summary += " Domain: " + geometry_.description() + " inside the lattice's box, "
                          "volume " + std::to_string(volume) + " (IDS per unit volume of the mesh).";
    else if (geometry_.any_periodic())
      in.model_summary += " Faces: " + geometry_.description() +
                          ", the listed boundary conditions on the other faces.";
    in.model_summary += " Units: " + units_.description() + ".";
    // Stored records are in solver units; everything analysed and shown is in the user's unit.
    if (units_.is_physical())
      {
        in.energy_unit        = "E (" + units_.energy_label() + ")";
        in.energy_column      = "energy_" + units_.energy_label();
        in.solver_energy_unit = units_.solver_energy_unit();
        // The reduced unit of the tables is the solver's (per nm², not per cell edge²).
        in.model_summary += " The energy_reduced columns and the stored records use the solver "
                            "unit hbar^2/(2 m* nm^2) = " +
                            short_number(units_.solver_energy_unit(), 6) + " " +
                            units_.energy_label() + ".";
      }
    return in;
  }

  std::vector<double>
  StudyModel::semiclassical_count(const std::uint64_t                           r,
                                  const std::pair<double, std::vector<double>> &volumes) const
  {
    return phase_space_count(solver_cell_values(r), solver_energies("count"), lattice_.dimension(),
                             volumes);
  }

  std::vector<double> StudyModel::spectrum_grid(const double lower, const double upper)
  {
    if (!std::isfinite(lower) || !std::isfinite(upper) || !(upper > lower))
      throw InputError("parameter 'study/energies' = auto: the verified spectra give no range to "
                       "tabulate (from " + short_number(lower, 6) + " to " +
                       short_number(upper, 6) + "); ask for more eigenvalues, or give a range "
                       "'start to stop by step'");
    // At most this many intervals: fine enough to show the IDS's steps in
    // small boxes, coarse enough for quick tables (common practice, no source).
    constexpr double most_intervals = 200;
    const double     wanted         = (upper - lower) / most_intervals;
    const double     decade         = std::pow(10.0, std::floor(std::log10(wanted)));
    double           step           = 10 * decade;
    for (const double m : {1.0, 2.0, 2.5, 5.0})
      if (m * decade >= wanted * (1 - 1e-12))
        {
          step = m * decade;
          break;
        }
    // Points as whole multiples of the step, so that they print as typed.
    const long long first = static_cast<long long>(std::floor(lower / step + 1e-9));
    const long long last  = static_cast<long long>(std::floor(upper / step + 1e-9));
    std::vector<double> grid;
    for (long long k = first; k <= last; ++k)
      grid.push_back(double(k) * step);
    return grid;
  }

  std::pair<double, double> StudyModel::spectrum_range(const std::string &directory) const
  {
    const std::vector<double> one_point{0.0};
    const StoredStudy         stored = describe_stored(directory, "", &one_point);
    return verified_range(stored.input.records, potential_.bottom());
  }

  StoredStudy StudyModel::describe_stored(const std::string         &directory,
                                          const std::string         &parameters_prm,
                                          const std::vector<double> *grid) const
  {
    StoredStudy stored;
    stored.directory  = directory;
    stored.parameters = flatten_parameters(parameters_prm);
    stored.seed       = study_.seed;
    const auto volumes = domain_volumes();
    stored.input       = analysis_input(volumes.first);
    AnalysisInput &in  = stored.input;
    in.parameters_text  = parameters_prm;
    in.source_directory = directory;
    const std::vector<Boundary> &boundaries = spectrum_.boundaries;

    std::set<std::uint64_t> realisations;
    StoredRecords read = read_stored_records(directory);
    for (const auto &warning : read.warnings)
      std::cerr << "alloyspec: warning: " << warning << '\n';
    // A realisation counts only with every boundary condition stored: the
    // last summary lines of a round can be lost to a crash, and averaging
    // Dirichlet over more realisations than Neumann would skew the bracket.
    std::map<std::uint64_t, std::size_t> boundaries_stored;
    for (const auto &r : read.records)
      ++boundaries_stored[r.realisation];
    std::size_t incomplete = 0;
    for (const auto &[r, n] : boundaries_stored)
      incomplete += n != boundaries.size();
    if (incomplete > 0)
      std::cerr << "alloyspec: warning: " << directory << ": " << incomplete
                << " realisation(s) lack a boundary condition (an interrupted run); they are "
                   "left out of the tables until the study is resumed\n";
    for (auto &r : read.records)
      if (boundaries_stored[r.realisation] == boundaries.size() &&
          r.realisation >= study_.first_realisation &&
          r.realisation < study_.first_realisation + study_.realisations &&
          std::find_if(boundaries.begin(), boundaries.end(), [&](Boundary bc) {
            return to_string(bc) == r.boundary;
          }) != boundaries.end())
        {
          realisations.insert(r.realisation);
          r.eigenvalues    = units_.to_user_energies(std::move(r.eigenvalues));
          // Bounds are differences of energies: the same factor, no offset.
          for (double &e : r.errors)
            e = units_.to_user_energy(e) - units_.to_user_energy(0.0);
          r.enclosure_lower = units_.to_user_energies(std::move(r.enclosure_lower));
          r.enclosure_upper = units_.to_user_energies(std::move(r.enclosure_upper));
          r.complete_up_to = units_.to_user_energy(r.complete_up_to);
          r.potential_min  = units_.to_user_energy(r.potential_min);
          r.potential_max  = units_.to_user_energy(r.potential_max);
          in.records.push_back(std::move(r));
        }
    if (realisations.empty())
      throw InputError("study folder '" + directory + "' holds no complete record of realisations " +
                       std::to_string(study_.first_realisation) + " to " +
                       std::to_string(study_.first_realisation + study_.realisations - 1) +
                       " (nothing to tabulate; resume the study to compute them)");

    // Phase-space (semiclassical) count of the same realisations; the cell
    // values are regenerated from the counter-based stream, not stored.
    // Tilted sampling: drawn at the stored study's tilt, weighted like every
    // other average (w = 1 when plain).
    if (grid)
      in.energies = *grid;
    else if (study_.energies_from_spectrum)
      {
        const auto [lower, upper] = verified_range(in.records, potential_.bottom());
        in.energies               = spectrum_grid(lower, upper);
      }
    stored.semiclassical_sum.assign(in.energies.size(), 0.0);
    PotentialModel potential = potential_;
    if (sampling_.is_tilted())
      potential.set_tilt(stored_tilt(directory));
    const std::vector<double> energies = units_.to_solver_energies(in.energies);
    for (const std::uint64_t r : realisations)
      {
        const std::vector<double> q_user = potential.cell_values(study_.seed, r);
        const double              w      = std::exp(potential.log_weight(q_user));
        const std::vector<double> counts =
          phase_space_count(units_.to_solver_energies(q_user), energies, lattice_.dimension(), volumes);
        for (std::size_t i = 0; i < counts.size(); ++i)
          stored.semiclassical_sum[i] += w * counts[i];
      }
    return stored;
  }

  void StudyModel::apply_tilt_mixture(StoredStudy &stored,
                                      const std::vector<TiltComponent> &mixture) const
  {
    PotentialModel drawn = potential_;
    if (sampling_.is_tilted())
      drawn.set_tilt(stored_tilt(stored.directory));
    std::vector<PotentialModel> components;
    std::vector<double>         shares;
    for (const auto &c : mixture)
      {
        // Each component is that study's own sampling law: its θ and its windows.
        components.push_back(potential_);
        components.back().set_tilt_window(c.theta != 0.0 ? c.window : 0, c.untilted_share);
        components.back().set_tilt(c.theta);
        shares.push_back(c.share);
      }
    std::set<std::uint64_t> realisations;
    for (const auto &r : stored.input.records)
      realisations.insert(r.realisation);
    const auto                volumes  = domain_volumes();
    // The grid the stored study was tabulated on (its own, shared, or auto).
    const std::vector<double> energies = units_.to_solver_energies(stored.input.energies);
    std::map<std::uint64_t, double> log_weight;
    stored.semiclassical_sum.assign(energies.size(), 0.0);
    for (const std::uint64_t r : realisations)
      {
        const std::vector<double> q_user = drawn.cell_values(study_.seed, r);
        std::vector<double>       ell;
        for (const auto &c : components)
          ell.push_back(c.log_weight(q_user));
        const double lw = balance_log_weight(ell, shares);
        log_weight[r]   = lw;
        const std::vector<double> counts =
          phase_space_count(units_.to_solver_energies(q_user), energies, lattice_.dimension(), volumes);
        for (std::size_t i = 0; i < counts.size(); ++i)
          stored.semiclassical_sum[i] += std::exp(lw) * counts[i];
      }
    for (auto &r : stored.input.records)
      r.log_weight = log_weight.at(r.realisation);
    stored.tilt_mixture = true;
  }
} // namespace alloyspec
