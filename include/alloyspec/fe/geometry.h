/** @file geometry.h  The domain of a study: the box with mixed face conditions, or a mesh from a file. */
#pragma once

#include <alloyspec/fe/discretisation.h>

#include <string>
#include <vector>

namespace alloyspec
{
  class Lattice;

  /**
   * Where the operator lives and which faces are fixed.
   *
   * Parameters:
   * - `spectrum/periodic directions` (list of x, y, z; empty by default):
   *   these directions are periodic in every solve; the bracketing conditions
   *   of `spectrum/boundary conditions` then apply to the faces of the other
   *   directions. A slab is `x, y` (Dirichlet or Neumann on the two faces
   *   normal to z), a wire is `z`.
   * - `lattice/mesh file` (empty by default = the box of the lattice): a Gmsh
   *   `.msh` file (quadrilaterals in 2D, hexahedra in 3D), in the length unit
   *   of the study, lying inside the box of the lattice. The lattice then only
   *   defines the grid of the cell potential; the bracketing condition applies
   *   on the whole boundary of the mesh (periodic is not offered for meshes).
   * - `lattice/mesh refinements` (0 to 4): global refinements of the mesh read.
   */
  struct GeometrySettings
  {
    /** Per direction of the lattice: periodic in every solve. */
    std::vector<bool> periodic;
    std::string       mesh_file;
    unsigned int      mesh_refinements = 0;

    /**
     * Sets the geometry of @p lattice (its mesh file and refinements) with the
     * periodic directions @p periodic_directions (the text of
     * `spectrum/periodic directions`, a list of x, y, z). Throws InputError for
     * an unknown or repeated direction, a direction beyond the lattice's
     * dimension, or periodic directions together with a mesh file.
     */
    void configure(const Lattice &lattice, const std::string &periodic_directions);

    bool has_mesh() const { return !mesh_file.empty(); }
    bool any_periodic() const;

    /**
     * Conditions per direction when bracketing with @p bracketing: periodic in
     * the periodic directions, @p bracketing in the others.
     */
    BoundaryConditions conditions(Boundary bracketing, unsigned int dimension) const;

    /** e.g. "periodic in x, y" or "mesh 'wire.msh' (1 refinement)"; empty for the plain box. */
    std::string description() const;
  };
} // namespace alloyspec
