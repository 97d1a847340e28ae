/**
 * @file element_integrals.h  (private to src/fe) What the serial mesh
 * (cellwise_discretisation.h) and the distributed box (distributed_box.cc)
 * compute the same way on one element: the lattice cell it belongs to, its
 * mass and stiffness matrices, and the integrals of |u|² and |u|⁴ behind the
 * localisation measures.
 */
#pragma once

#include <alloyspec/model/lattice.h>

#include <deal.II/base/point.h>
#include <deal.II/fe/fe_values.h>
#include <deal.II/lac/full_matrix.h>

#include <algorithm>
#include <array>
#include <cmath>
#include <cstddef>
#include <utility>
#include <vector>

namespace alloyspec::internal
{
  /**
   * The lattice cell containing @p p, clamped into the box: a point on the
   * box's far face (x_d = L_d a) belongs to the last cell. An element's cell
   * is that of its centre, so it does not depend on how the mesh is split.
   */
  template <int dim>
  std::size_t lattice_cell_containing(const Lattice &lattice, const dealii::Point<dim> &p)
  {
    std::array<unsigned int, 3> c{{0, 0, 0}};
    for (unsigned int d = 0; d < dim; ++d)
      {
        const double x = std::floor(p[d] / lattice.cell_size());
        c[d]           = static_cast<unsigned int>(
          std::clamp(x, 0.0, static_cast<double>(lattice.cells()[d] - 1)));
      }
    return lattice.cell_index(c);
  }

  /**
   * @f$(M_e)_{ij} = \int_e \varphi_i\varphi_j@f$ and
   * @f$(A_e)_{ij} = \int_e \nabla\varphi_i\cdot\nabla\varphi_j@f$ by the
   * quadrature of @p fe_values, already evaluated on the element (values,
   * gradients and weights).
   */
  template <int dim>
  void element_matrices(const dealii::FEValues<dim> &fe_values, dealii::FullMatrix<double> &mass,
                        dealii::FullMatrix<double> &stiffness)
  {
    const unsigned int n = fe_values.dofs_per_cell;
    mass.reinit(n, n);
    stiffness.reinit(n, n);
    for (unsigned int q = 0; q < fe_values.n_quadrature_points; ++q)
      for (unsigned int i = 0; i < n; ++i)
        for (unsigned int j = 0; j < n; ++j)
          {
            mass(i, j) += fe_values.shape_value(i, q) * fe_values.shape_value(j, q) * fe_values.JxW(q);
            stiffness(i, j) +=
              fe_values.shape_grad(i, q) * fe_values.shape_grad(j, q) * fe_values.JxW(q);
          }
  }

  /**
   * The shape values of @p fe_values as a table, entry i n_q + q for shape
   * function i at point q: the same on every element of FE_Q, whose values
   * at the points of a reference quadrature do not depend on the element.
   */
  template <int dim>
  std::vector<double> shape_table(const dealii::FEValues<dim> &fe_values)
  {
    const unsigned int  n_q = fe_values.n_quadrature_points;
    std::vector<double> shape(fe_values.dofs_per_cell * n_q);
    for (unsigned int q = 0; q < n_q; ++q)
      for (unsigned int i = 0; i < fe_values.dofs_per_cell; ++i)
        shape[i * n_q + q] = fe_values.shape_value(i, q);
    return shape;
  }

  /**
   * @f$(\int_e u^2, \int_e u^4)@f$ for @f$u = \sum_i c_i \varphi_i@f$ on one
   * element, by the quadrature whose shape table (shape_table()) is
   * @p shape and whose weights on this element are @p jxw.
   * @param coefficient i ↦ c_i, the value of u at the element's DoF i.
   * @param values      scratch of n_q entries.
   */
  template <class Coefficient>
  std::pair<double, double> element_square_and_fourth(const std::vector<double> &shape,
                                                      const std::vector<double> &jxw,
                                                      const Coefficient         &coefficient,
                                                      std::vector<double>       &values)
  {
    const std::size_t n_q = jxw.size(), dofs_per_cell = shape.size() / n_q;
    values.assign(n_q, 0.0);
    for (std::size_t i = 0; i < dofs_per_cell; ++i)
      {
        const double  c   = coefficient(i);
        const double *row = shape.data() + i * n_q;
        for (std::size_t q = 0; q < n_q; ++q)
          values[q] += c * row[q];
      }
    double square = 0, fourth = 0;
    for (std::size_t q = 0; q < n_q; ++q)
      {
        const double s = values[q] * values[q];
        square += s * jxw[q];
        fourth += s * s * jxw[q];
      }
    return {square, fourth};
  }
} // namespace alloyspec::internal
