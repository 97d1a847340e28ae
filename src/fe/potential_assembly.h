/**
 * @file potential_assembly.h  (private to src/fe) The one assembly of a
 * realisation's potential into K, shared by the serial mesh
 * (cellwise_discretisation.h) and the distributed box (distributed_box.cc).
 */
#pragma once

#include <alloyspec/fe/spectral_problem.h>

#include <deal.II/base/index_set.h>
#include <deal.II/lac/affine_constraints.h>
#include <deal.II/lac/full_matrix.h>
#include <deal.II/lac/vector_operation.h>

#include <petscmat.h>

#include <algorithm>
#include <cmath>
#include <cstddef>
#include <limits>
#include <vector>

namespace alloyspec::internal
{
  /** Least and greatest cell value over a set of elements (+∞, −∞ for none). */
  struct ValueRange
  {
    double min = std::numeric_limits<double>::infinity();
    double max = -std::numeric_limits<double>::infinity();
  };

  /**
   * The value μ given to the constrained rows' diagonal, so that they carry
   * the eigenvalue μ only. With @f$\beta = \max_e \mathrm{tr}(M_e^{-1}A_e)@f$
   * (≥ λ_max of every element pencil ≥ λ_max of the assembled pencil of A,
   * the element-by-element bound) every genuine eigenvalue of (A + Σ q M, M)
   * is at most β + max q, so @f$\mu = 2\beta + |q_{\max}| + 1@f$ clears them.
   */
  inline double pushed_out_eigenvalue(const double element_bound, const double potential_max)
  {
    return 2.0 * element_bound + std::abs(potential_max) + 1.0;
  }

  /** What a discretisation holds for adding a realisation's potential to K. */
  struct PotentialAssembly
  {
    const dealii::AffineConstraints<double> &constraints;
    /** The DoFs of element e, at [e n, (e + 1) n) with n = dofs_per_element. */
    const std::vector<dealii::types::global_dof_index> &element_dofs;
    unsigned int                                        dofs_per_element;
    /** The rows of K this process sets: the constrained ones among them get μ. */
    const dealii::IndexSet &rows;
    /** A, the stiffness matrix without potential, with K's pattern and rows. */
    Mat stiffness;
    /** β = max_e tr(M_e⁻¹ A_e) (pushed_out_eigenvalue). */
    double element_bound;
    /** min_e λ_min(M_e) (SpectralProblem::mass_floor). */
    double mass_floor;
  };

  /**
   * @f$K = A + \sum_e q_e M_e@f$ over the elements of this process, with the
   * constrained rows decoupled at μ, and the bounds of @p problem set from
   * the range of the q_e:
   * lower_bound = min q (H ≥ min q, and so is its Rayleigh–Ritz image),
   * upper_bound = β + max q, spurious_eigenvalue = μ(max q).
   *
   * The row/column form of distribute_local_to_global adds nothing to the
   * constrained diagonals, which are then set to μ; cells with q = 0 add
   * nothing and are skipped.
   *
   * @param value_of    e ↦ q_e, the value of the lattice cell of element e.
   * @param mass_of     e ↦ M_e (the one reference matrix on a box of translates).
   * @param whole_range the range over this process's elements ↦ the range over
   *                    the whole mesh: the identity on a serial mesh, a min/max
   *                    over the ranks of a distributed one (a collective call:
   *                    every rank must push its constrained rows to the same μ).
   * @param K           K with A's pattern (problem.K, or problem.K_parts).
   */
  template <class Matrix, class ValueOf, class MassOf, class WholeRange>
  void assemble_cell_potential(const PotentialAssembly &assembly, const ValueOf &value_of,
                               const MassOf &mass_of, const WholeRange &whole_range,
                               SpectralProblem &problem, Matrix &K)
  {
    const unsigned int n          = assembly.dofs_per_element;
    const std::size_t  n_elements = assembly.element_dofs.size() / n;
    ValueRange range;
    for (std::size_t e = 0; e < n_elements; ++e)
      range.min = std::min(range.min, value_of(e)), range.max = std::max(range.max, value_of(e));
    range                       = whole_range(range);
    problem.lower_bound         = range.min;
    problem.spurious_eigenvalue = pushed_out_eigenvalue(assembly.element_bound, range.max);
    problem.upper_bound         = assembly.element_bound + range.max;
    problem.mass_floor          = assembly.mass_floor;

    MatCopy(assembly.stiffness, K, SAME_NONZERO_PATTERN);
    dealii::FullMatrix<double>                   local(n, n);
    std::vector<dealii::types::global_dof_index> dofs(n);
    for (std::size_t e = 0; e < n_elements; ++e)
      {
        const double q = value_of(e);
        if (q == 0.0)
          continue;
        local.equ(q, mass_of(e));
        dofs.assign(assembly.element_dofs.begin() + e * n,
                    assembly.element_dofs.begin() + (e + 1) * n);
        assembly.constraints.distribute_local_to_global(local, dofs, dofs, K);
      }
    K.compress(dealii::VectorOperation::add);
    for (const auto i : assembly.rows)
      if (assembly.constraints.is_constrained(i))
        K.set(i, i, problem.spurious_eigenvalue);
    K.compress(dealii::VectorOperation::insert);
  }
} // namespace alloyspec::internal
