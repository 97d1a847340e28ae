#include <alloyspec/analysis/spectral_analysis.h>
#include <alloyspec/analysis/summary.h>
#include <alloyspec/app/study_model.h>
#include <alloyspec/core/errors.h>
#include <alloyspec/io/results_store.h>
#include <alloyspec/model/weyl_law.h>
#include <alloyspec/solver/landscape.h>

#include <deal.II/base/parameter_handler.h>

#include <algorithm>
#include <cmath>
#include <numeric>
#include <set>

namespace alloyspec
{
  void StudyModel::declare_parameters(dealii::ParameterHandler &prm)
  {
    Lattice::declare_parameters(prm);
    UnitSystem::declare_parameters(prm);
    PotentialModel::declare_parameters(prm);
    DiscretisationSettings::declare_parameters(prm);
    SpectrumSettings::declare_parameters(prm);
    StudySettings::declare_parameters(prm);
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
    if (geometry_.has_mesh())
      for (const Boundary bc : spectrum_.boundaries)
        if (bc == Boundary::periodic)
          throw InputError("parameter 'spectrum/boundary conditions': 'periodic' is not allowed "
                           "with 'lattice/mesh file' (allowed: dirichlet, neumann)");
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

  std::vector<double> StudyModel::solver_cell_values(const std::uint64_t realisation) const
  {
    return units_.to_solver_energies(potential_.cell_values(study_.seed, realisation));
  }

  std::vector<double> StudyModel::solver_energies() const
  {
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
      }
    return in;
  }

  std::vector<double>
  StudyModel::semiclassical_count(const std::uint64_t                           r,
                                  const std::pair<double, std::vector<double>> &volumes) const
  {
    // In solver units: a density per unit volume does not depend on the
    // energy unit. Each cell weighs with the volume of the domain that carries
    // its value (all alike in a box, the mesh's share otherwise).
    const auto &[volume, cell_volumes]         = volumes;
    const std::vector<double> energies_solver = solver_energies();
    const std::vector<double> q               = solver_cell_values(r);
    std::vector<double>       counts(energies_solver.size(), 0.0);
    for (std::size_t i = 0; i < energies_solver.size(); ++i)
      {
        double sum = 0;
        for (std::size_t n = 0; n < q.size(); ++n)
          if (cell_volumes[n] > 0)
            sum += cell_volumes[n] * free_ids_density(lattice_.dimension(), energies_solver[i] - q[n]);
        counts[i] = sum / volume;
      }
    return counts;
  }

  StoredStudy StudyModel::describe_stored(const std::string &directory,
                                          const std::string &parameters_prm) const
  {
    StoredStudy stored;
    stored.directory  = directory;
    stored.parameters = flatten_parameters(parameters_prm);
    stored.seed       = study_.seed;
    const auto volumes = domain_volumes();
    stored.input       = analysis_input(volumes.first);
    AnalysisInput &in  = stored.input;
    in.parameters_text = parameters_prm;

    std::set<std::uint64_t> realisations;
    for (auto &r : ResultsStore::read(directory))
      if (r.realisation >= study_.first_realisation &&
          r.realisation < study_.first_realisation + study_.realisations &&
          std::find_if(spectrum_.boundaries.begin(), spectrum_.boundaries.end(), [&](Boundary bc) {
            return to_string(bc) == r.boundary;
          }) != spectrum_.boundaries.end())
        {
          realisations.insert(r.realisation);
          r.eigenvalues    = units_.to_user_energies(std::move(r.eigenvalues));
          r.complete_up_to = units_.to_user_energy(r.complete_up_to);
          r.potential_min  = units_.to_user_energy(r.potential_min);
          r.potential_max  = units_.to_user_energy(r.potential_max);
          in.records.push_back(std::move(r));
        }

    // Phase-space (semiclassical) count of the same realisations; the cell
    // values are regenerated from the counter-based stream, not stored.
    stored.semiclassical_sum.assign(study_.energies.size(), 0.0);
    for (const std::uint64_t r : realisations)
      {
        const std::vector<double> counts = semiclassical_count(r, volumes);
        for (std::size_t i = 0; i < counts.size(); ++i)
          stored.semiclassical_sum[i] += counts[i];
      }
    return stored;
  }
} // namespace alloyspec
