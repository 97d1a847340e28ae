#include <alloyspec/discretisation.h>
#include <alloyspec/errors.h>
#include <alloyspec/lattice.h>
#include <alloyspec/spectral_problem.h>

#include <deal.II/base/parameter_handler.h>
#include <deal.II/base/quadrature_lib.h>
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
#include <deal.II/lac/sparsity_pattern.h>
#include <deal.II/lac/vector.h>
#include <deal.II/numerics/data_out.h>

#include <petscmat.h>

#include <algorithm>
#include <cmath>
#include <fstream>

namespace alloyspec
{
  void DiscretisationSettings::declare_parameters(dealii::ParameterHandler &prm)
  {
    prm.enter_subsection("discretisation");
    prm.declare_entry("degree", "2", dealii::Patterns::Integer(1, 4),
                      "Polynomial degree p of the Lagrange elements FE_Q(p). Eigenvalue errors fall "
                      "like h^(2p).");
    prm.declare_entry("elements per cell", "2", dealii::Patterns::Integer(1, 8),
                      "Number r of elements per unit cell along each edge (mesh size h = a/r). "
                      "Element faces lie on the cell faces, so the jumps of the potential cost no "
                      "convergence order.");
    prm.leave_subsection();
  }

  void DiscretisationSettings::parse_parameters(dealii::ParameterHandler &prm)
  {
    prm.enter_subsection("discretisation");
    degree            = prm.get_integer("degree");
    elements_per_cell = prm.get_integer("elements per cell");
    prm.leave_subsection();
  }

  Boundary boundary_from_string(const std::string &name, const std::string &parameter)
  {
    if (name == "dirichlet")
      return Boundary::dirichlet;
    if (name == "neumann")
      return Boundary::neumann;
    if (name == "periodic")
      return Boundary::periodic;
    throw InputError("parameter '" + parameter + "': unknown boundary condition '" + name +
                     "' (allowed: dirichlet, neumann, periodic)");
  }

  std::string to_string(Boundary bc)
  {
    switch (bc)
      {
        case Boundary::dirichlet:
          return "dirichlet";
        case Boundary::neumann:
          return "neumann";
        case Boundary::periodic:
          return "periodic";
      }
    return "unknown";
  }

  namespace
  {
    template <int dim>
    class BoxDiscretisation final : public Discretisation
    {
    public:
      BoxDiscretisation(const Lattice &lattice, const DiscretisationSettings &settings,
                        const BoundaryConditions &bcs)
        : lattice_(lattice)
        , settings_(settings)
        , bcs_(bcs)
        , fe_(settings.degree)
        , dof_handler_(triangulation_)
      {}

      void make_grid() override
      {
        std::vector<unsigned int> subdivisions(dim);
        dealii::Point<dim>        corner;
        for (unsigned int d = 0; d < dim; ++d)
          {
            subdivisions[d] = lattice_.cells()[d] * settings_.elements_per_cell;
            corner[d]       = lattice_.cells()[d] * lattice_.cell_size();
          }
        // colorize: faces x_d = 0 get id 2d, faces x_d = L_d get id 2d+1.
        dealii::GridGenerator::subdivided_hyper_rectangle(triangulation_, subdivisions,
                                                          dealii::Point<dim>(), corner, true);
      }

      void setup_system() override
      {
        dof_handler_.distribute_dofs(fe_);
        constraints_.clear();
        for (unsigned int d = 0; d < dim; ++d)
          if (bcs_[d] == Boundary::dirichlet)
            for (unsigned int side = 0; side < 2; ++side)
              dealii::DoFTools::make_zero_boundary_constraints(dof_handler_, 2 * d + side,
                                                               constraints_);
        for (unsigned int d = 0; d < dim; ++d)
          if (bcs_[d] == Boundary::periodic)
            dealii::DoFTools::make_periodicity_constraints(dof_handler_, 2 * d, 2 * d + 1, d,
                                                           constraints_);
        constraints_.close();

        dealii::DynamicSparsityPattern dsp(dof_handler_.n_dofs());
        // Keep the constrained rows: their diagonal carries the pushed-out eigenvalue.
        dealii::DoFTools::make_sparsity_pattern(dof_handler_, dsp, constraints_, true);
        sparsity_.copy_from(dsp);

        // Element → lattice cell, and the DoF indices of every element, cached
        // because a realisation only needs these to add its potential.
        const unsigned int dofs_per_cell = fe_.n_dofs_per_cell();
        element_cell_.clear();
        element_dofs_.clear();
        element_cell_.reserve(triangulation_.n_active_cells());
        element_dofs_.reserve(triangulation_.n_active_cells() * dofs_per_cell);
        std::vector<dealii::types::global_dof_index> dofs(dofs_per_cell);
        for (const auto &cell : dof_handler_.active_cell_iterators())
          {
            const dealii::Point<dim>     centre = cell->center();
            std::array<unsigned int, 3> c{0, 0, 0};
            for (unsigned int d = 0; d < dim; ++d)
              c[d] = static_cast<unsigned int>(std::floor(centre[d] / lattice_.cell_size()));
            element_cell_.push_back(lattice_.cell_index(c));
            cell->get_dof_indices(dofs);
            element_dofs_.insert(element_dofs_.end(), dofs.begin(), dofs.end());
          }
      }

      void assemble_fixed() override
      {
        const unsigned int         dofs_per_cell = fe_.n_dofs_per_cell();
        const dealii::QGauss<dim> quadrature(fe_.degree + 1);
        dealii::FEValues<dim>      fe_values(fe_, quadrature,
                                        dealii::update_values | dealii::update_gradients |
                                          dealii::update_JxW_values);
        // Every element of the uniform mesh is a translate of the first one, so
        // one element's matrices serve them all.
        fe_values.reinit(triangulation_.begin_active());
        local_mass_.reinit(dofs_per_cell, dofs_per_cell);
        local_stiffness_.reinit(dofs_per_cell, dofs_per_cell);
        for (unsigned int q = 0; q < quadrature.size(); ++q)
          for (unsigned int i = 0; i < dofs_per_cell; ++i)
            for (unsigned int j = 0; j < dofs_per_cell; ++j)
              {
                local_mass_(i, j) +=
                  fe_values.shape_value(i, q) * fe_values.shape_value(j, q) * fe_values.JxW(q);
                local_stiffness_(i, j) +=
                  fe_values.shape_grad(i, q) * fe_values.shape_grad(j, q) * fe_values.JxW(q);
              }

        // tr(M_e^{-1} K_e) ≥ λ_max of the element pencil ≥ λ_max of the
        // assembled pencil (element-by-element bound), so 2× it clears the spectrum.
        dealii::FullMatrix<double> inverse_mass(dofs_per_cell, dofs_per_cell), product(dofs_per_cell, dofs_per_cell);
        inverse_mass.invert(local_mass_);
        inverse_mass.mmult(product, local_stiffness_);
        element_bound_ = product.trace();

        stiffness_.reinit(sparsity_);
        mass_.reinit(sparsity_);
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
        for (dealii::types::global_dof_index i = 0; i < dof_handler_.n_dofs(); ++i)
          if (constraints_.is_constrained(i))
            mass_.set(i, i, 1.0);
        mass_.compress(dealii::VectorOperation::insert);
      }

      std::unique_ptr<SpectralProblem> make_problem() const override
      {
        auto problem = std::make_unique<SpectralProblem>();
        problem->K.reinit(sparsity_);
        problem->M.reinit(sparsity_);
        MatCopy(mass_, problem->M, SAME_NONZERO_PATTERN);
        problem->constrained.assign(dof_handler_.n_dofs(), false);
        for (dealii::types::global_dof_index i = 0; i < dof_handler_.n_dofs(); ++i)
          problem->constrained[i] = constraints_.is_constrained(i);
        return problem;
      }

      void assemble_potential(const std::vector<double> &cell_values,
                              SpectralProblem &          problem) const override
      {
        AssertThrow(cell_values.size() == lattice_.n_cells(),
                    dealii::ExcMessage("cell value count does not match the lattice"));
        const double q_min = *std::min_element(cell_values.begin(), cell_values.end());
        const double q_max = *std::max_element(cell_values.begin(), cell_values.end());
        problem.lower_bound         = q_min;
        problem.spurious_eigenvalue = spurious_eigenvalue(q_max);

        MatCopy(stiffness_, problem.K, SAME_NONZERO_PATTERN);
        const unsigned int         dofs_per_cell = fe_.n_dofs_per_cell();
        dealii::FullMatrix<double> local(dofs_per_cell, dofs_per_cell);
        std::vector<dealii::types::global_dof_index> dofs(dofs_per_cell);
        for (std::size_t e = 0; e < element_cell_.size(); ++e)
          {
            const double q = cell_values[element_cell_[e]];
            if (q == 0.0)
              continue;
            local.equ(q, local_mass_);
            dofs.assign(element_dofs_.begin() + e * dofs_per_cell,
                        element_dofs_.begin() + (e + 1) * dofs_per_cell);
            // The row/column form adds nothing to constrained diagonals.
            constraints_.distribute_local_to_global(local, dofs, dofs, problem.K);
          }
        problem.K.compress(dealii::VectorOperation::add);
        for (dealii::types::global_dof_index i = 0; i < dof_handler_.n_dofs(); ++i)
          if (constraints_.is_constrained(i))
            problem.K.set(i, i, problem.spurious_eigenvalue);
        problem.K.compress(dealii::VectorOperation::insert);
      }

      std::size_t n_dofs() const override { return dof_handler_.n_dofs(); }
      std::size_t n_constrained_dofs() const override { return constraints_.n_constraints(); }
      std::size_t n_elements() const override { return triangulation_.n_active_cells(); }

      double spurious_eigenvalue(double potential_max) const override
      {
        return 2.0 * element_bound_ + std::abs(potential_max) + 1.0;
      }

      dealii::Vector<double> full_vector(const std::vector<double> &u) const
      {
        dealii::Vector<double> v(u.begin(), u.end());
        constraints_.distribute(v);
        return v;
      }

      double inverse_participation_ratio(const std::vector<double> &u) const override
      {
        const dealii::Vector<double> v = full_vector(u);
        const dealii::QGauss<dim>    quadrature(fe_.degree + 2);
        dealii::FEValues<dim> fe_values(fe_, quadrature, dealii::update_values | dealii::update_JxW_values);
        std::vector<double> values(quadrature.size());
        double              l2 = 0, l4 = 0;
        for (const auto &cell : dof_handler_.active_cell_iterators())
          {
            fe_values.reinit(cell);
            fe_values.get_function_values(v, values);
            for (unsigned int q = 0; q < quadrature.size(); ++q)
              {
                const double s = values[q] * values[q];
                l2 += s * fe_values.JxW(q);
                l4 += s * s * fe_values.JxW(q);
              }
          }
        return l4 / (l2 * l2);
      }

      void write_vtu(const std::string &path, const std::vector<double> &cell_values,
                     const std::vector<std::string> &names,
                     const std::vector<std::vector<double>> &fields) const override
      {
        dealii::DataOut<dim> data_out;
        data_out.attach_dof_handler(dof_handler_);
        std::vector<dealii::Vector<double>> vectors;
        vectors.reserve(fields.size());
        for (const auto &f : fields)
          vectors.push_back(full_vector(f));
        for (std::size_t i = 0; i < vectors.size(); ++i)
          data_out.add_data_vector(vectors[i], names[i]);
        dealii::Vector<double> potential(triangulation_.n_active_cells());
        for (std::size_t e = 0; e < element_cell_.size(); ++e)
          potential[e] = cell_values[element_cell_[e]];
        data_out.add_data_vector(potential, "potential", dealii::DataOut<dim>::type_cell_data);
        data_out.build_patches(fe_.degree);
        std::ofstream out(path);
        AssertThrow(out, dealii::ExcMessage("cannot write " + path));
        data_out.write_vtu(out);
      }

    private:
      const Lattice                lattice_;
      const DiscretisationSettings settings_;
      const BoundaryConditions     bcs_;

      dealii::Triangulation<dim> triangulation_;
      dealii::FE_Q<dim>          fe_;
      dealii::DoFHandler<dim>    dof_handler_;
      dealii::AffineConstraints<double> constraints_;
      dealii::SparsityPattern           sparsity_;

      std::vector<std::size_t>                     element_cell_;
      std::vector<dealii::types::global_dof_index> element_dofs_;
      dealii::FullMatrix<double>                   local_mass_, local_stiffness_;
      double                                       element_bound_ = 0;
      backend::SparseMatrix                        stiffness_, mass_;
    };
  } // namespace

  std::unique_ptr<Discretisation> Discretisation::create(const Lattice &                lattice,
                                                         const DiscretisationSettings &settings,
                                                         const BoundaryConditions &    bcs)
  {
    AssertThrow(bcs.size() == lattice.dimension(),
                dealii::ExcMessage("one boundary condition per direction is needed"));
    switch (lattice.dimension())
      {
        case 1:
          return std::make_unique<BoxDiscretisation<1>>(lattice, settings, bcs);
        case 2:
          return std::make_unique<BoxDiscretisation<2>>(lattice, settings, bcs);
        case 3:
          return std::make_unique<BoxDiscretisation<3>>(lattice, settings, bcs);
        default:
          throw InputError("parameter 'lattice/cells': 1 to 3 entries allowed");
      }
  }
} // namespace alloyspec
