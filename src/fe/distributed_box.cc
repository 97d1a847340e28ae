/**
 * @file distributed_box.cc  The box of the lattice on a distributed mesh
 * (deal.II's p4est triangulation): every rank holds its own elements and a
 * layer of ghosts, and its rows of K and M.
 */
#include <alloyspec/core/errors.h>
#include <alloyspec/fe/discretisation.h>
#include <alloyspec/fe/spectral_problem.h>
#include <alloyspec/model/lattice.h>

#include "cellwise_discretisation.h"
#include "element_integrals.h"
#include "potential_assembly.h"

#include <deal.II/base/index_set.h>
#include <deal.II/base/mpi.h>
#include <deal.II/base/quadrature_lib.h>
#include <deal.II/distributed/tria.h>
#include <deal.II/dofs/dof_handler.h>
#include <deal.II/dofs/dof_tools.h>
#include <deal.II/fe/fe_q.h>
#include <deal.II/fe/fe_values.h>
#include <deal.II/grid/grid_generator.h>
#include <deal.II/grid/grid_tools.h>
#include <deal.II/grid/tria.h>
#include <deal.II/lac/affine_constraints.h>
#include <deal.II/lac/dynamic_sparsity_pattern.h>
#include <deal.II/lac/full_matrix.h>
#include <deal.II/lac/la_parallel_vector.h>
#include <deal.II/lac/sparsity_tools.h>

#include <petscmat.h>

#include <algorithm>
#include <array>
#include <cmath>
#include <limits>
#include <stdexcept>

namespace alloyspec
{
  namespace
  {
    /**
     * FE_Q(p) on the box of the lattice, r elements per cell edge, on a
     * parallel::distributed::Triangulation. Nothing here has the size of the
     * whole problem: the coarse mesh p4est replicates on every rank has
     * (L_d r / 2^k) trees per direction (2^k the largest power of two
     * dividing every L_d r with at least two trees left, so 27 trees at
     * L = 24 or 48, 8 at L = 32 or 64), and everything else is per owned
     * element or per locally relevant DoF.
     *
     * The same space, constraints, element matrices and pushed-out value μ as
     * the serial box (discretisation.cc), so the genuine eigenvalues are the
     * same; only the DoF numbering differs (by rank). Each element's lattice
     * cell comes from its centre, so cell values are those of the serial path
     * whatever the partition.
     */
    template <int dim>
    class DistributedBox final : public Discretisation
    {
    public:
      DistributedBox(const Lattice &lattice, const DiscretisationSettings &settings,
                     const BoundaryConditions &bcs, MPI_Comm comm)
        : lattice_(lattice)
        , settings_(settings)
        , bcs_(bcs)
        , comm_(comm)
        , triangulation_(comm)
        , fe_(settings.degree)
        , dof_handler_(triangulation_)
      {}

      bool     distributed() const override { return true; }
      MPI_Comm communicator() const override { return comm_; }

      void make_grid() override
      {
        unsigned int refinements = std::numeric_limits<unsigned int>::max();
        for (unsigned int d = 0; d < dim; ++d)
          {
            unsigned int e = lattice_.cells()[d] * settings_.elements_per_cell, halvings = 0;
            while (e % 2 == 0 && e / 2 >= 2)
              e /= 2, ++halvings;
            refinements = std::min(refinements, halvings);
          }
        std::vector<unsigned int> subdivisions(dim);
        dealii::Point<dim>        corner;
        for (unsigned int d = 0; d < dim; ++d)
          {
            subdivisions[d] = (lattice_.cells()[d] * settings_.elements_per_cell) >> refinements;
            corner[d]       = lattice_.cells()[d] * lattice_.cell_size();
          }
        // colorize: faces x_d = 0 get id 2d, faces x_d = L_d get id 2d+1 (as the serial box).
        dealii::GridGenerator::subdivided_hyper_rectangle(triangulation_, subdivisions,
                                                          dealii::Point<dim>(), corner, true);
        // p4est must know the periodic neighbours before refinement, so that
        // ghost layers reach across the wrap.
        std::vector<dealii::GridTools::PeriodicFacePair<
          typename dealii::parallel::distributed::Triangulation<dim>::cell_iterator>>
          pairs;
        for (unsigned int d = 0; d < dim; ++d)
          if (bcs_[d] == Boundary::periodic)
            dealii::GridTools::collect_periodic_faces(triangulation_, 2 * d, 2 * d + 1, d, pairs);
        if (!pairs.empty())
          triangulation_.add_periodicity(pairs);
        triangulation_.refine_global(refinements);
      }

      void setup_system() override
      {
        dof_handler_.distribute_dofs(fe_);
        owned_    = dof_handler_.locally_owned_dofs();
        relevant_ = dealii::DoFTools::extract_locally_relevant_dofs(dof_handler_);
        AssertThrow(owned_.is_contiguous(),
                    dealii::ExcMessage("distributed mesh: the owned DoFs are not contiguous"));
        constraints_.clear();
        constraints_.reinit(relevant_);
        // The order of the serial box: Dirichlet faces, then periodic images.
        for (unsigned int d = 0; d < dim; ++d)
          if (bcs_[d] == Boundary::dirichlet)
            for (unsigned int side = 0; side < 2; ++side)
              dealii::DoFTools::make_zero_boundary_constraints(dof_handler_, 2 * d + side, constraints_);
        for (unsigned int d = 0; d < dim; ++d)
          if (bcs_[d] == Boundary::periodic)
            dealii::DoFTools::make_periodicity_constraints(dof_handler_, 2 * d, 2 * d + 1, d,
                                                           constraints_);
        constraints_.close();

        sparsity_.reinit(relevant_.size(), relevant_.size(), relevant_);
        // Keep the constrained rows: their diagonal carries the pushed-out eigenvalue.
        dealii::DoFTools::make_sparsity_pattern(dof_handler_, sparsity_, constraints_, true);
        dealii::SparsityTools::distribute_sparsity_pattern(sparsity_, owned_, comm_, relevant_);

        const unsigned int dofs_per_cell = fe_.n_dofs_per_cell();
        element_cell_.clear();
        element_dofs_.clear();
        std::vector<dealii::types::global_dof_index> dofs(dofs_per_cell);
        for (const auto &cell : dof_handler_.active_cell_iterators())
          if (cell->is_locally_owned())
            {
              element_cell_.push_back(internal::lattice_cell_containing(lattice_, cell->center()));
              cell->get_dof_indices(dofs);
              element_dofs_.insert(element_dofs_.end(), dofs.begin(), dofs.end());
            }
        local_cells_ = element_cell_;
        std::sort(local_cells_.begin(), local_cells_.end());
        local_cells_.erase(std::unique(local_cells_.begin(), local_cells_.end()), local_cells_.end());
        element_slot_.resize(element_cell_.size());
        for (std::size_t e = 0; e < element_cell_.size(); ++e)
          element_slot_[e] = static_cast<std::size_t>(
            std::lower_bound(local_cells_.begin(), local_cells_.end(), element_cell_[e]) -
            local_cells_.begin());

        std::size_t constrained = 0;
        for (const auto i : owned_)
          constrained += constraints_.is_constrained(i) ? 1 : 0;
        n_constrained_ = dealii::Utilities::MPI::sum(constrained, comm_);
      }

      void assemble_fixed() override
      {
        compute_element_matrices();
        stiffness_.reinit(owned_, owned_, sparsity_, comm_);
        mass_.reinit(owned_, owned_, sparsity_, comm_);
        const unsigned int                           dofs_per_cell = fe_.n_dofs_per_cell();
        std::vector<dealii::types::global_dof_index> dofs(dofs_per_cell);
        for (std::size_t e = 0; e < element_cell_.size(); ++e)
          {
            dofs.assign(element_dofs_.begin() + e * dofs_per_cell,
                        element_dofs_.begin() + (e + 1) * dofs_per_cell);
            constraints_.distribute_local_to_global(local_stiffness_, dofs, stiffness_);
            constraints_.distribute_local_to_global(local_mass_, dofs, mass_);
          }
        stiffness_.compress(dealii::VectorOperation::add);
        mass_.compress(dealii::VectorOperation::add);
        for (const auto i : owned_)
          if (constraints_.is_constrained(i))
            mass_.set(i, i, 1.0);
        mass_.compress(dealii::VectorOperation::insert);
      }

      std::unique_ptr<SpectralProblem> make_problem() const override
      {
        auto problem         = std::make_unique<SpectralProblem>();
        problem->distributed = true;
        problem->K_parts.reinit(owned_, owned_, sparsity_, comm_);
        problem->M_parts.reinit(owned_, owned_, sparsity_, comm_);
        MatCopy(mass_, problem->M_parts, SAME_NONZERO_PATTERN);
        problem->first_row = owned_.n_elements() > 0 ? owned_.nth_index_in_set(0) : 0;
        problem->constrained.assign(owned_.n_elements(), false);
        std::size_t genuine = 0;
        for (std::size_t i = 0; i < problem->constrained.size(); ++i)
          {
            problem->constrained[i] = constraints_.is_constrained(problem->first_row + i);
            genuine += problem->constrained[i] ? 0 : 1;
          }
        problem->genuine_rows = dealii::Utilities::MPI::sum(genuine, comm_);
        return problem;
      }

      std::vector<std::size_t> local_cells() const override { return local_cells_; }

      void assemble_potential(const std::vector<double> &cell_values,
                              SpectralProblem &          problem) const override
      {
        AssertThrow(cell_values.size() == local_cells_.size(),
                    dealii::ExcMessage("distributed mesh: one value per local cell is needed"));
        internal::assemble_cell_potential(
          internal::PotentialAssembly{constraints_, element_dofs_, fe_.n_dofs_per_cell(), owned_,
                                      stiffness_, element_bound_, element_mass_floor_},
          [&](const std::size_t e) { return cell_values[element_slot_[e]]; },
          [this](std::size_t) -> const dealii::FullMatrix<double> & { return local_mass_; },
          [this](const internal::ValueRange &range) {
            // Every rank must push the constrained rows to the same μ.
            return internal::ValueRange{dealii::Utilities::MPI::min(range.min, comm_),
                                        dealii::Utilities::MPI::max(range.max, comm_)};
          },
          problem, problem.K_parts);
      }

      std::size_t n_dofs() const override { return dof_handler_.n_dofs(); }
      std::size_t n_constrained_dofs() const override { return n_constrained_; }
      std::size_t n_elements() const override { return triangulation_.n_global_active_cells(); }

      double spurious_eigenvalue(double potential_max) const override
      {
        return internal::pushed_out_eigenvalue(element_bound_, potential_max);
      }

      double volume() const override { return lattice_.volume(); }

      std::vector<double> cell_volumes() const override
      {
        return std::vector<double>(lattice_.n_cells(), std::pow(lattice_.cell_size(), double(dim)));
      }

      /** This rank's rows of b_i = ∫φ_i, condensed (0 at constrained rows). */
      std::vector<double> load_vector() const override
      {
        dealii::LinearAlgebra::distributed::Vector<double> load(owned_, relevant_, comm_);
        const unsigned int  dofs_per_cell = fe_.n_dofs_per_cell();
        dealii::Vector<double> local(dofs_per_cell), ones(dofs_per_cell);
        ones = 1.0;
        // Lagrange shape functions sum to 1, so ∫φ_i = Σ_j (M_e)_ij.
        local_mass_.vmult(local, ones);
        std::vector<dealii::types::global_dof_index> dofs(dofs_per_cell);
        for (std::size_t e = 0; e < element_cell_.size(); ++e)
          {
            dofs.assign(element_dofs_.begin() + e * dofs_per_cell,
                        element_dofs_.begin() + (e + 1) * dofs_per_cell);
            constraints_.distribute_local_to_global(local, dofs, load);
          }
        load.compress(dealii::VectorOperation::add);
        std::vector<double> owned(owned_.n_elements());
        for (std::size_t i = 0; i < owned.size(); ++i)
          owned[i] = load.local_element(i);
        return owned;
      }
      std::vector<double> complete(const std::vector<double> &) const override
      {
        throw serial_only("whole vectors");
      }
      /** From this rank's rows of @p u, the Gauss points (p+1 per direction) of its own elements. */
      void quadrature_values(const std::vector<double> &u, std::vector<double> &values,
                             std::vector<double> &weights) const override
      {
        const dealii::LinearAlgebra::distributed::Vector<double> v = ghosted(u);
        const ReferenceElement reference(lattice_, settings_, fe_.degree + 1,
                                         dealii::update_values | dealii::update_JxW_values);
        const dealii::FEValues<dim> &fe_values = reference.values;
        const unsigned int n_q = fe_values.n_quadrature_points, dofs_per_cell = fe_.n_dofs_per_cell();
        values.assign(n_q * element_cell_.size(), 0.0);
        weights.resize(values.size());
        for (std::size_t e = 0; e < element_cell_.size(); ++e)
          {
            const auto *dofs = element_dofs_.data() + e * dofs_per_cell;
            for (unsigned int q = 0; q < n_q; ++q)
              {
                double value = 0;
                for (unsigned int i = 0; i < dofs_per_cell; ++i)
                  value += v(dofs[i]) * fe_values.shape_value(i, q);
                values[e * n_q + q]  = value;
                weights[e * n_q + q] = fe_values.JxW(q);
              }
          }
      }
      void write_vtu(const std::string &, const std::vector<double> &,
                     const std::vector<std::string> &,
                     const std::vector<std::vector<double>> &) const override
      {
        throw serial_only("VTU output");
      }

      double inverse_participation_ratio(const std::vector<double> &u) const override
      {
        std::vector<double> ipr, weight;
        localisation_measures({u}, 0, ipr, weight);
        return ipr.front();
      }

      double cell_weight(const std::vector<double> &u, std::size_t cell) const override
      {
        std::vector<double> ipr, weight;
        localisation_measures({u}, cell, ipr, weight);
        return weight.front();
      }

      /**
       * Collective over the mesh's ranks. Each vector holds this rank's owned
       * rows (or, from the direct path, the whole vector); the integrals run
       * over owned elements with ghost values and are summed over the ranks.
       */
      void localisation_measures(const std::vector<std::vector<double>> &vectors,
                                 const std::size_t lattice_cell, std::vector<double> &ipr,
                                 std::vector<double> &weight) const override
      {
        const std::size_t k = vectors.size();
        ipr.assign(k, 0.0);
        weight.assign(k, 0.0);
        if (k == 0)
          return;
        // Every element is a translate of the reference one: one table of
        // shape values, one Jacobian weight per point.
        const ReferenceElement reference(lattice_, settings_, fe_.degree + 2,
                                         dealii::update_values | dealii::update_JxW_values);
        const dealii::FEValues<dim> &fe_values = reference.values;
        const unsigned int  dofs_per_cell = fe_.n_dofs_per_cell();
        const std::vector<double> shape = internal::shape_table(fe_values);
        std::vector<double>       jxw(fe_values.n_quadrature_points), values;
        for (unsigned int q = 0; q < jxw.size(); ++q)
          jxw[q] = fe_values.JxW(q);
        // [l2 of each, l4 of each, inside of each], summed over ranks at once.
        std::vector<double> sums(3 * k, 0.0);
        for (std::size_t j = 0; j < k; ++j)
          {
            const dealii::LinearAlgebra::distributed::Vector<double> v = ghosted(vectors[j]);
            for (std::size_t e = 0; e < element_cell_.size(); ++e)
              {
                const auto *dofs            = element_dofs_.data() + e * dofs_per_cell;
                const auto [local2, local4] = internal::element_square_and_fourth(
                  shape, jxw, [&](const std::size_t i) { return v(dofs[i]); }, values);
                sums[j] += local2;
                sums[k + j] += local4;
                if (element_cell_[e] == lattice_cell)
                  sums[2 * k + j] += local2;
              }
          }
        dealii::Utilities::MPI::sum(sums, comm_, sums);
        for (std::size_t j = 0; j < k; ++j)
          {
            ipr[j]    = sums[k + j] / (sums[j] * sums[j]);
            weight[j] = sums[2 * k + j] / sums[j];
          }
      }

      /**
       * Collective over the mesh's ranks: every rank samples its owned
       * elements, rank 0 of the mesh gets all samples (sorted by y, then x;
       * the others get none).
       */
      std::vector<std::array<double, 3>> slice_values(const std::vector<double> &u) const override
      {
        const dealii::LinearAlgebra::distributed::Vector<double> v = ghosted(u);
        std::vector<std::array<double, 3>> samples;
        const double z_mid = dim == 3 ? 0.5 * lattice_.cells()[dim - 1] * lattice_.cell_size() : 0.0;
        for (const auto &cell : dof_handler_.active_cell_iterators())
          if (cell->is_locally_owned())
            internal::append_plane_samples<dim>(fe_, cell, z_mid, v, samples);
        std::vector<double> flat;
        flat.reserve(3 * samples.size());
        for (const auto &s : samples)
          flat.insert(flat.end(), s.begin(), s.end());
        const auto all = dealii::Utilities::MPI::gather(comm_, flat, 0);
        samples.clear();
        if (dealii::Utilities::MPI::this_mpi_process(comm_) != 0)
          return samples;
        for (const auto &part : all)
          for (std::size_t i = 0; i + 2 < part.size(); i += 3)
            samples.push_back({{part[i], part[i + 1], part[i + 2]}});
        std::sort(samples.begin(), samples.end(), [](const auto &a, const auto &b) {
          return a[1] != b[1] ? a[1] < b[1] : a[0] < b[0];
        });
        return samples;
      }

    private:
      /**
       * One element of the box at the origin, with @p flags evaluated at the
       * Gauss points (@p points_per_direction of them per direction) in
       * @c values. Every element is a translate of it, so these are the
       * shape values, gradients and weights of every element.
       */
      struct ReferenceElement
      {
        ReferenceElement(const Lattice &lattice, const DiscretisationSettings &settings,
                         const unsigned int points_per_direction, const dealii::UpdateFlags flags)
          : fe(settings.degree)
          , dof_handler(triangulation)
          , values(fe, dealii::QGauss<dim>(points_per_direction), flags)
        {
          dealii::Point<dim> corner;
          for (unsigned int d = 0; d < dim; ++d)
            corner[d] = lattice.cell_size() / settings.elements_per_cell;
          dealii::GridGenerator::hyper_rectangle(triangulation, dealii::Point<dim>(), corner);
          dof_handler.distribute_dofs(fe);
          values.reinit(dof_handler.begin_active());
        }
        dealii::Triangulation<dim> triangulation;
        dealii::FE_Q<dim>          fe;
        dealii::DoFHandler<dim>    dof_handler;
        /** Declared last: destroyed before the mesh it was evaluated on. */
        dealii::FEValues<dim>      values;
      };

      static std::logic_error serial_only(const std::string &what)
      {
        return std::logic_error(what + " of a distributed mesh are not available (serial mesh only)");
      }

      /** The owned rows of @p u (or the whole @p u) with constraints applied and ghosts filled. */
      dealii::LinearAlgebra::distributed::Vector<double> ghosted(const std::vector<double> &u) const
      {
        dealii::LinearAlgebra::distributed::Vector<double> v(owned_, relevant_, comm_);
        const std::size_t first = owned_.n_elements() > 0 ? owned_.nth_index_in_set(0) : 0;
        const bool        whole = u.size() == dof_handler_.n_dofs();
        AssertThrow(whole || u.size() == owned_.n_elements(),
                    dealii::ExcMessage("distributed mesh: a vector of neither owned nor all rows"));
        for (std::size_t i = 0; i < owned_.n_elements(); ++i)
          v.local_element(i) = u[whole ? first + i : i];
        constraints_.distribute(v);
        v.update_ghost_values();
        return v;
      }

      void compute_element_matrices()
      {
        const ReferenceElement reference(lattice_, settings_, fe_.degree + 1,
                                         dealii::update_values | dealii::update_gradients |
                                           dealii::update_JxW_values);
        internal::element_matrices(reference.values, local_mass_, local_stiffness_);
        using Serial        = internal::CellwiseDiscretisation<dim>;
        element_bound_      = Serial::pencil_bound(local_mass_, local_stiffness_);
        element_mass_floor_ = Serial::smallest_eigenvalue(local_mass_);
      }

      const Lattice                lattice_;
      const DiscretisationSettings settings_;
      const BoundaryConditions     bcs_;
      MPI_Comm                     comm_;

      dealii::parallel::distributed::Triangulation<dim> triangulation_;
      dealii::FE_Q<dim>                                 fe_;
      dealii::DoFHandler<dim>                           dof_handler_;
      dealii::IndexSet                                  owned_, relevant_;
      dealii::AffineConstraints<double>                 constraints_;
      dealii::DynamicSparsityPattern                    sparsity_;
      std::size_t                                       n_constrained_ = 0;

      /** Per owned element: its lattice cell, its slot in local_cells_, its DoFs. */
      std::vector<std::size_t>                     element_cell_, element_slot_;
      std::vector<dealii::types::global_dof_index> element_dofs_;
      std::vector<std::size_t>                     local_cells_;

      dealii::FullMatrix<double> local_mass_, local_stiffness_;
      double                     element_bound_      = 0;
      double                     element_mass_floor_ = 0;
      backend::DistributedSparseMatrix stiffness_, mass_;
    };
  } // namespace

  std::unique_ptr<Discretisation> Discretisation::create_distributed(const Lattice &lattice,
                                                                     const DiscretisationSettings &settings,
                                                                     const BoundaryConditions &bcs,
                                                                     MPI_Comm comm)
  {
    AssertThrow(bcs.size() == lattice.dimension(),
                dealii::ExcMessage("one boundary condition per direction is needed"));
    switch (lattice.dimension())
      {
        case 2:
          return std::make_unique<DistributedBox<2>>(lattice, settings, bcs, comm);
        case 3:
          return std::make_unique<DistributedBox<3>>(lattice, settings, bcs, comm);
        default:
          throw std::logic_error("the distributed mesh needs a 2D or 3D lattice (p4est)");
      }
  }
} // namespace alloyspec
