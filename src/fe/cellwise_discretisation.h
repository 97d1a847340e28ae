/**
 * @file cellwise_discretisation.h  (private to src/) The finite-element
 * machinery shared by the box and the mesh discretisations: DoFs, constraints,
 * the element → lattice-cell map, assembly of K = A + Σ q_n M_n, and the
 * evaluations (IPR, quadrature values, VTU output). A concrete class supplies
 * the mesh, the constraints and the element matrices.
 */
#pragma once

#include <alloyspec/fe/backend.h>
#include <alloyspec/fe/discretisation.h>
#include <alloyspec/model/lattice.h>
#include <alloyspec/fe/spectral_problem.h>

#include "element_integrals.h"
#include "potential_assembly.h"

#include <deal.II/base/index_set.h>
#include <deal.II/base/quadrature_lib.h>
#include <deal.II/dofs/dof_handler.h>
#include <deal.II/dofs/dof_tools.h>
#include <deal.II/fe/fe_q.h>
#include <deal.II/fe/fe_values.h>
#include <deal.II/grid/tria.h>
#include <deal.II/lac/affine_constraints.h>
#include <deal.II/lac/dynamic_sparsity_pattern.h>
#include <deal.II/lac/full_matrix.h>
#include <deal.II/lac/lapack_full_matrix.h>
#include <deal.II/lac/sparsity_pattern.h>
#include <deal.II/lac/vector.h>
#include <deal.II/numerics/data_out.h>

#include <petscmat.h>

#include <algorithm>
#include <array>
#include <cmath>
#include <filesystem>
#include <fstream>
#include <limits>

namespace alloyspec::internal
{
  /**
   * Appends to @p samples the values of @p field on element @p cell at the
   * points of a regular m × m grid of its (x, y) extent (m = p + 2, cell
   * centred), as (x, y, value); in 3D on the plane z = @p z_mid, and only if
   * the element meets that plane: its z-range is half-open, so that a plane
   * on a face between elements is sampled once, from above. The sampling of
   * the eigenfunction maps, shared by the serial and the distributed mesh.
   */
  template <int dim, class CellIterator, class VectorType>
  void append_plane_samples(const dealii::FE_Q<dim> &fe, const CellIterator &cell,
                            const double z_mid, const VectorType &field,
                            std::vector<std::array<double, 3>> &samples)
  {
    const unsigned int m = fe.degree + 2; // points per direction and element
    double             t = 0;             // local z of the plane in this element
    if constexpr (dim == 3)
      {
        double lo = std::numeric_limits<double>::infinity(), hi = -lo;
        for (unsigned int v = 0; v < cell->n_vertices(); ++v)
          lo = std::min(lo, cell->vertex(v)[2]), hi = std::max(hi, cell->vertex(v)[2]);
        if (!(z_mid >= lo && z_mid < hi))
          return;
        t = (z_mid - lo) / (hi - lo);
      }
    std::vector<dealii::Point<dim>> unit;
    for (unsigned int i = 0; i < m; ++i)
      for (unsigned int j = 0; j < (dim > 1 ? m : 1u); ++j)
        {
          dealii::Point<dim> p;
          p[0] = (i + 0.5) / m;
          if constexpr (dim > 1)
            p[1] = (j + 0.5) / m;
          if constexpr (dim > 2)
            p[2] = t;
          unit.push_back(p);
        }
    const dealii::Quadrature<dim> points(unit);
    dealii::FEValues<dim> fe_values(fe, points, dealii::update_values | dealii::update_quadrature_points);
    fe_values.reinit(cell);
    std::vector<double> values(unit.size());
    fe_values.get_function_values(field, values);
    for (unsigned int q = 0; q < unit.size(); ++q)
      {
        const auto &x      = fe_values.quadrature_point(q);
        double      second = 0.0;
        if constexpr (dim > 1)
          second = x[1];
        samples.push_back({{x[0], second, values[q]}});
      }
  }

  /**
   * Q_p elements on a mesh whose every element takes the value of one lattice
   * cell (the cell containing its centre).
   */
  template <int dim>
  class CellwiseDiscretisation : public Discretisation
  {
  public:
    using CellIterator = typename dealii::DoFHandler<dim>::active_cell_iterator;

    CellwiseDiscretisation(const Lattice &lattice, const DiscretisationSettings &settings)
      : lattice_(lattice)
      , settings_(settings)
      , fe_(settings.degree)
      , dof_handler_(triangulation_)
    {}

    void setup_system() override
    {
      dof_handler_.distribute_dofs(fe_);
      constraints_.clear();
      dealii::DoFTools::make_hanging_node_constraints(dof_handler_, constraints_);
      make_constraints();
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
      element_volume_.clear();
      element_cell_.reserve(triangulation_.n_active_cells());
      element_dofs_.reserve(triangulation_.n_active_cells() * dofs_per_cell);
      std::vector<dealii::types::global_dof_index> dofs(dofs_per_cell);
      for (const auto &cell : dof_handler_.active_cell_iterators())
        {
          element_cell_.push_back(lattice_cell_containing(lattice_, cell->center()));
          element_volume_.push_back(cell->measure());
          cell->get_dof_indices(dofs);
          element_dofs_.insert(element_dofs_.end(), dofs.begin(), dofs.end());
        }
    }

    void assemble_fixed() override
    {
      compute_element_matrices();
      const unsigned int dofs_per_cell = fe_.n_dofs_per_cell();
      stiffness_.reinit(sparsity_);
      mass_.reinit(sparsity_);
      load_.reinit(dof_handler_.n_dofs());
      dealii::Vector<double>                       local_load(dofs_per_cell);
      dealii::Vector<double>                       ones(dofs_per_cell);
      ones = 1.0;
      std::vector<dealii::types::global_dof_index> dofs(dofs_per_cell);
      for (std::size_t e = 0; e < element_cell_.size(); ++e)
        {
          dofs.assign(element_dofs_.begin() + e * dofs_per_cell,
                      element_dofs_.begin() + (e + 1) * dofs_per_cell);
          constraints_.distribute_local_to_global(element_stiffness(e), dofs, stiffness_);
          constraints_.distribute_local_to_global(element_mass(e), dofs, mass_);
          // Lagrange shape functions sum to 1, so ∫φ_i = Σ_j (M_e)_ij.
          element_mass(e).vmult(local_load, ones);
          constraints_.distribute_local_to_global(local_load, dofs, load_);
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
      // Only cells that carry elements bound the operator (a mesh may leave cells empty).
      const dealii::IndexSet rows = dealii::complete_index_set(dof_handler_.n_dofs());
      assemble_cell_potential(
        PotentialAssembly{constraints_, element_dofs_, fe_.n_dofs_per_cell(), rows, stiffness_,
                          element_bound_, element_mass_floor_},
        [&](const std::size_t e) { return cell_values[element_cell_[e]]; },
        [this](const std::size_t e) -> const dealii::FullMatrix<double> & { return element_mass(e); },
        [](const ValueRange &range) { return range; }, problem, problem.K);
    }

    std::size_t n_dofs() const override { return dof_handler_.n_dofs(); }
    std::size_t n_constrained_dofs() const override { return constraints_.n_constraints(); }
    std::size_t n_elements() const override { return triangulation_.n_active_cells(); }

    double spurious_eigenvalue(double potential_max) const override
    {
      return pushed_out_eigenvalue(element_bound_, potential_max);
    }

    double volume() const override
    {
      double v = 0;
      for (const double x : element_volume_)
        v += x;
      return v;
    }

    std::vector<double> cell_volumes() const override
    {
      std::vector<double> v(lattice_.n_cells(), 0.0);
      for (std::size_t e = 0; e < element_cell_.size(); ++e)
        v[element_cell_[e]] += element_volume_[e];
      return v;
    }

    std::vector<double> load_vector() const override
    {
      return std::vector<double>(load_.begin(), load_.end());
    }

    std::vector<double> complete(const std::vector<double> &u) const override
    {
      const dealii::Vector<double> v = full_vector(u);
      return std::vector<double>(v.begin(), v.end());
    }

    void quadrature_values(const std::vector<double> &u, std::vector<double> &values,
                           std::vector<double> &weights) const override
    {
      const dealii::Vector<double> v = full_vector(u);
      const dealii::QGauss<dim>    quadrature(fe_.degree + 1);
      dealii::FEValues<dim> fe_values(fe_, quadrature, dealii::update_values | dealii::update_JxW_values);
      std::vector<double> local(quadrature.size());
      values.clear();
      weights.clear();
      values.reserve(quadrature.size() * triangulation_.n_active_cells());
      weights.reserve(values.capacity());
      for (const auto &cell : dof_handler_.active_cell_iterators())
        {
          fe_values.reinit(cell);
          fe_values.get_function_values(v, local);
          for (unsigned int q = 0; q < quadrature.size(); ++q)
            {
              values.push_back(local[q]);
              weights.push_back(fe_values.JxW(q));
            }
        }
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

    double cell_weight(const std::vector<double> &u, std::size_t lattice_cell) const override
    {
      const dealii::Vector<double> v = full_vector(u);
      const dealii::QGauss<dim>    quadrature(fe_.degree + 1);
      dealii::FEValues<dim> fe_values(fe_, quadrature, dealii::update_values | dealii::update_JxW_values);
      std::vector<double> values(quadrature.size());
      double              inside = 0, total = 0;
      std::size_t         e = 0;
      for (const auto &cell : dof_handler_.active_cell_iterators())
        {
          fe_values.reinit(cell);
          fe_values.get_function_values(v, values);
          double local = 0;
          for (unsigned int q = 0; q < quadrature.size(); ++q)
            local += values[q] * values[q] * fe_values.JxW(q);
          total += local;
          if (element_cell_[e++] == lattice_cell)
            inside += local;
        }
      return inside / total;
    }

    void localisation_measures(const std::vector<std::vector<double>> &vectors,
                               const std::size_t lattice_cell, std::vector<double> &ipr,
                               std::vector<double> &weight) const override
    {
      const std::size_t k = vectors.size();
      ipr.assign(k, 0.0);
      weight.assign(k, 0.0);
      if (k == 0 || element_cell_.empty())
        return;
      std::vector<dealii::Vector<double>> full;
      full.reserve(k);
      for (const auto &u : vectors)
        full.push_back(full_vector(u));
      // p+2 points per direction: exact for |u|⁴ in 1D and for |u|² always,
      // the rules of inverse_participation_ratio() and cell_weight().
      const dealii::QGauss<dim> quadrature(fe_.degree + 2);
      dealii::FEValues<dim>     fe_values(fe_, quadrature,
                                      dealii::update_values | dealii::update_JxW_values);
      // Values of FE_Q shape functions at the quadrature points are those of
      // the reference element on every element; only the weights change.
      fe_values.reinit(dof_handler_.begin_active());
      const unsigned int        dofs_per_cell = fe_.n_dofs_per_cell();
      const std::vector<double> shape         = shape_table(fe_values);
      std::vector<double>       jxw(quadrature.size()), values;
      std::vector<double>       l2(k, 0.0), l4(k, 0.0), inside(k, 0.0);
      std::size_t               e = 0;
      for (const auto &cell : dof_handler_.active_cell_iterators())
        {
          fe_values.reinit(cell);
          for (unsigned int q = 0; q < jxw.size(); ++q)
            jxw[q] = fe_values.JxW(q);
          const auto *dofs = element_dofs_.data() + e * dofs_per_cell;
          for (std::size_t j = 0; j < k; ++j)
            {
              const auto [local2, local4] = element_square_and_fourth(
                shape, jxw, [&](const std::size_t i) { return full[j][dofs[i]]; }, values);
              l2[j] += local2;
              l4[j] += local4;
              if (element_cell_[e] == lattice_cell)
                inside[j] += local2;
            }
          ++e;
        }
      for (std::size_t j = 0; j < k; ++j)
        {
          ipr[j]    = l4[j] / (l2[j] * l2[j]);
          weight[j] = inside[j] / l2[j];
        }
    }

    std::vector<std::array<double, 3>> slice_values(const std::vector<double> &u) const override
    {
      std::vector<std::array<double, 3>> samples;
      const dealii::Vector<double>       full = full_vector(u);
      double z_low = std::numeric_limits<double>::infinity(), z_high = -z_low;
      if constexpr (dim == 3)
        for (const auto &v : triangulation_.get_vertices())
          z_low = std::min(z_low, v[2]), z_high = std::max(z_high, v[2]);
      const double z_mid = 0.5 * (z_low + z_high);
      for (const auto &cell : dof_handler_.active_cell_iterators())
        append_plane_samples<dim>(fe_, cell, z_mid, full, samples);
      return samples;
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
      // Written under a temporary name, then renamed: a crash never leaves a
      // half-written file under the real name.
      const std::string partial = path + ".partial";
      {
        std::ofstream out(partial);
        AssertThrow(out, dealii::ExcMessage("cannot write " + partial));
        data_out.write_vtu(out);
        out.close();
        AssertThrow(out, dealii::ExcMessage("cannot write " + partial));
      }
      std::filesystem::rename(partial, path);
    }

  protected:
    /** Adds the boundary conditions to constraints_ (hanging nodes are done). */
    virtual void make_constraints() = 0;
    /** Fills the element matrices and element_bound_ (called by assemble_fixed()). */
    virtual void compute_element_matrices() = 0;
    /** @f$(M_e)_{ij} = \int_e \varphi_i\varphi_j@f$ of element e (active-cell order). */
    virtual const dealii::FullMatrix<double> &element_mass(std::size_t e) const = 0;
    /** @f$(A_e)_{ij} = \int_e \nabla\varphi_i\cdot\nabla\varphi_j@f$ of element e. */
    virtual const dealii::FullMatrix<double> &element_stiffness(std::size_t e) const = 0;

    /** Element mass and stiffness matrices of @p cell by Gauss quadrature with p+1 points. */
    void local_matrices(const CellIterator &cell, dealii::FullMatrix<double> &mass,
                        dealii::FullMatrix<double> &stiffness) const
    {
      const dealii::QGauss<dim> quadrature(fe_.degree + 1);
      dealii::FEValues<dim>     fe_values(fe_, quadrature,
                                      dealii::update_values | dealii::update_gradients |
                                        dealii::update_JxW_values);
      fe_values.reinit(cell);
      element_matrices(fe_values, mass, stiffness);
    }

  public:
    // Shared with the distributed box (distributed_box.cc), whose elements are translates too.
    /** @f$\mathrm{tr}(M_e^{-1}A_e)@f$, an upper bound of the element pencil's eigenvalues. */
    static double pencil_bound(const dealii::FullMatrix<double> &mass,
                               const dealii::FullMatrix<double> &stiffness)
    {
      dealii::FullMatrix<double> inverse(mass.m(), mass.n()), product(mass.m(), mass.n());
      inverse.invert(mass);
      inverse.mmult(product, stiffness);
      return product.trace();
    }

    /** Smallest eigenvalue of an element mass matrix (LAPACK, symmetric). */
    static double smallest_eigenvalue(const dealii::FullMatrix<double> &mass)
    {
      dealii::LAPACKFullMatrix<double> copy(mass.m(), mass.n());
      copy = mass;
      copy.compute_eigenvalues();
      double smallest = std::numeric_limits<double>::infinity();
      for (unsigned int i = 0; i < mass.m(); ++i)
        smallest = std::min(smallest, copy.eigenvalue(i).real());
      return smallest;
    }

  protected:
    dealii::Vector<double> full_vector(const std::vector<double> &u) const
    {
      dealii::Vector<double> v(u.begin(), u.end());
      constraints_.distribute(v);
      return v;
    }

    const Lattice                lattice_;
    const DiscretisationSettings settings_;

    dealii::Triangulation<dim>        triangulation_;
    dealii::FE_Q<dim>                 fe_;
    dealii::DoFHandler<dim>           dof_handler_;
    dealii::AffineConstraints<double> constraints_;
    dealii::SparsityPattern           sparsity_;

    std::vector<std::size_t>                     element_cell_;
    std::vector<double>                          element_volume_;
    std::vector<dealii::types::global_dof_index> element_dofs_;
    double                                       element_bound_ = 0;
    /** min over elements of λ_min(M_e): SpectralProblem::mass_floor (filled with element_bound_). */
    double                                       element_mass_floor_ = 0;
    backend::SparseMatrix                        stiffness_, mass_;
    dealii::Vector<double>                       load_;
  };
} // namespace alloyspec::internal
