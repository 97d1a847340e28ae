#include <alloyspec/fe/discretisation.h>
#include <alloyspec/core/errors.h>
#include <alloyspec/core/text_input.h>
#include <alloyspec/model/lattice.h>
#include <alloyspec/fe/spectral_problem.h>

#include "cellwise_discretisation.h"

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
    prm.declare_entry(
      "error estimate", "none", dealii::Patterns::Selection("none|richardson"),
      "Per-eigenvalue discretisation error bound (column 'error' of eigenvalues.csv). "
      "'richardson': a second solve of every realisation with twice the elements per cell; "
      "the bound is 3 times the Richardson estimate (lambda_h - lambda_h/2) 4^p/(4^p - 1) "
      "(both Rayleigh-Ritz eigenvalues lie above the exact one). The second solve has 2^d "
      "times the unknowns: on the 6x6x6 demo (Q2, r = 2) the solve phase took 18 times "
      "longer, hence the default 'none' (the column then holds nan). 'alloyspec verify' "
      "checks the bound against exact spectra.");
    prm.declare_entry(
      "accuracy", "", dealii::Patterns::Anything(),
      "Empty, or a relative target (e.g. 1e-4, between 1e-12 and 0.1) for the error bound of "
      "every eigenvalue asked for: err/max(|lambda|,1). When set, a pilot solve of realisation "
      "0 raises the degree, then the elements per cell, until the target is met, and the "
      "chosen values replace 'degree' and 'elements per cell' (printed and stored in run.json).");
    prm.leave_subsection();
  }

  void DiscretisationSettings::parse_parameters(dealii::ParameterHandler &prm)
  {
    prm.enter_subsection("discretisation");
    degree            = prm.get_integer("degree");
    elements_per_cell = prm.get_integer("elements per cell");
    error_estimate    = prm.get("error estimate");
    const std::string text = prm.get("accuracy");
    prm.leave_subsection();
    accuracy = optional_number(text, "discretisation/accuracy", 1e-12, 0.1,
                               "empty, or a number from 1e-12 to 0.1");
  }

  namespace
  {
    /**
     * The box of the lattice, each cell split into r^d equal elements: every
     * element is a translate of the first, so one pair of element matrices
     * serves them all.
     */
    template <int dim>
    class BoxDiscretisation final : public internal::CellwiseDiscretisation<dim>
    {
      using Base = internal::CellwiseDiscretisation<dim>;

    public:
      BoxDiscretisation(const Lattice &lattice, const DiscretisationSettings &settings,
                        const BoundaryConditions &bcs)
        : Base(lattice, settings)
        , bcs_(bcs)
      {}

      void make_grid() override
      {
        std::vector<unsigned int> subdivisions(dim);
        dealii::Point<dim>        corner;
        for (unsigned int d = 0; d < dim; ++d)
          {
            subdivisions[d] = this->lattice_.cells()[d] * this->settings_.elements_per_cell;
            corner[d]       = this->lattice_.cells()[d] * this->lattice_.cell_size();
          }
        // colorize: faces x_d = 0 get id 2d, faces x_d = L_d get id 2d+1.
        dealii::GridGenerator::subdivided_hyper_rectangle(this->triangulation_, subdivisions,
                                                          dealii::Point<dim>(), corner, true);
      }

      /** Exactly the box's measure (the element sum differs by rounding). */
      double volume() const override { return this->lattice_.volume(); }

    protected:
      void make_constraints() override
      {
        for (unsigned int d = 0; d < dim; ++d)
          if (bcs_[d] == Boundary::dirichlet)
            for (unsigned int side = 0; side < 2; ++side)
              dealii::DoFTools::make_zero_boundary_constraints(this->dof_handler_, 2 * d + side,
                                                               this->constraints_);
        for (unsigned int d = 0; d < dim; ++d)
          if (bcs_[d] == Boundary::periodic)
            dealii::DoFTools::make_periodicity_constraints(this->dof_handler_, 2 * d, 2 * d + 1, d,
                                                           this->constraints_);
      }

      void compute_element_matrices() override
      {
        this->local_matrices(this->dof_handler_.begin_active(), local_mass_, local_stiffness_);
        this->element_bound_ = Base::pencil_bound(local_mass_, local_stiffness_);
        // Every element of the box is a translate of the first: one mass matrix.
        this->element_mass_floor_ = Base::smallest_eigenvalue(local_mass_);
      }

      const dealii::FullMatrix<double> &element_mass(std::size_t) const override
      {
        return local_mass_;
      }
      const dealii::FullMatrix<double> &element_stiffness(std::size_t) const override
      {
        return local_stiffness_;
      }

    private:
      const BoundaryConditions   bcs_;
      dealii::FullMatrix<double> local_mass_, local_stiffness_;
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
