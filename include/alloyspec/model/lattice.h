/** @file lattice.h  The box of unit cells Λ = [0, L1 a] × … × [0, L_d a]. */
#pragma once

#include <array>
#include <cstddef>
#include <string>
#include <vector>

namespace dealii
{
  class ParameterHandler;
}

namespace alloyspec
{
  /**
   * Range of `lattice/cell size`. The eigenvalues scale like 1/a², so a cell
   * of 1e-300 or 1e300 makes the stiffness matrix overflow or vanish next to
   * the mass matrix; within [0.01, 1000] the kinetic scale 1/a² lies in
   * [1e-6, 1e4], the same band as the potential values (max_potential_magnitude
   * in app/study.cc), where the factorisations keep full relative accuracy.
   * Physically: from a tenth of an ångström to a micrometre per cell in nm.
   */
  inline constexpr double min_cell_size = 1e-2;
  inline constexpr double max_cell_size = 1e3;

  /**
   * A box made of unit cells of edge length @f$a@f$ (the "cell size"), with
   * @f$L_1 \times \dots \times L_d@f$ cells, @f$d \in \{1,2,3\}@f$ given by the
   * number of entries of `set cells`. Cells are numbered lexicographically with
   * the first index fastest: @f$n = i + L_1 (j + L_2 k)@f$.
   *
   * Parameters (subsection `lattice`): `cells` (1 to 3 positive integers),
   * `cell size` (a > 0, in the length unit of the study).
   */
  class Lattice
  {
  public:
    Lattice() = default;
    /** Box with the given cells per direction (size 1..3) and cell size. */
    Lattice(const std::vector<unsigned int> &cells, double cell_size = 1.0);

    static void declare_parameters(dealii::ParameterHandler &prm);
    /** Reads subsection `lattice`; throws InputError on a bad value. */
    void parse_parameters(dealii::ParameterHandler &prm);

    unsigned int dimension() const { return static_cast<unsigned int>(cells_.size()); }
    const std::vector<unsigned int> &cells() const { return cells_; }
    double cell_size() const { return cell_size_; }
    /**
     * `lattice/mesh file`: a Gmsh file of the domain inside the box (the box
     * then only sets the grid of the cell potential); empty for the box itself.
     * Relative paths are resolved by the caller that reads the file.
     */
    const std::string &mesh_file() const { return mesh_file_; }
    /** `lattice/mesh refinements` (0 to 4; 0 without a mesh file). */
    unsigned int mesh_refinements() const { return mesh_refinements_; }
    /** @f$\prod_i L_i@f$. */
    std::size_t n_cells() const;
    /** Lexicographic index of the cell with integer coordinates @p c (unused entries ignored). */
    std::size_t cell_index(const std::array<unsigned int, 3> &c) const;
    /** Inverse of cell_index(); unused entries are 0. */
    std::array<unsigned int, 3> cell_coordinates(std::size_t index) const;
    /** @f$|\Lambda| = a^d \prod_i L_i@f$. */
    double volume() const;
    /** Edge lengths @f$L_i a@f$. */
    std::vector<double> extents() const;
    /** e.g. "8 x 8 x 8 cells of size 1". */
    std::string description() const;

  private:
    std::vector<unsigned int> cells_{8, 8, 8};
    double                    cell_size_ = 1.0;
    std::string               mesh_file_;
    unsigned int              mesh_refinements_ = 0;
  };
} // namespace alloyspec
