/** @file geometry.cc  Periodic directions and the mesh file of a study. */
#include <alloyspec/core/errors.h>
#include <alloyspec/fe/geometry.h>
#include <alloyspec/model/lattice.h>

#include <deal.II/base/utilities.h>

#include <algorithm>

namespace alloyspec
{
  namespace
  {
    const char *const      direction_names[]    = {"x", "y", "z"};
  } // namespace

  void GeometrySettings::configure(const Lattice &lattice, const std::string &directions)
  {
    const unsigned int dim = lattice.dimension();
    mesh_file              = lattice.mesh_file();
    mesh_refinements       = lattice.mesh_refinements();
    periodic.assign(dim, false);
    for (const auto &name : dealii::Utilities::split_string_list(directions, ','))
      {
        const auto  end = direction_names + dim;
        const auto *it  = std::find(direction_names, end, name);
        if (it == end)
          throw InputError("parameter 'spectrum/periodic directions': '" + name +
                           "' is not allowed (allowed: a list of " +
                           std::string(dim == 1 ? "x" : dim == 2 ? "x, y" : "x, y, z") +
                           " for a lattice of dimension " + std::to_string(dim) + ")");
        const auto d = static_cast<std::size_t>(it - direction_names);
        if (periodic[d])
          throw InputError("parameter 'spectrum/periodic directions': '" + name +
                           "' is listed twice (allowed: each direction once)");
        periodic[d] = true;
      }

    if (has_mesh() && any_periodic())
      throw InputError("parameter 'spectrum/periodic directions': '" + directions +
                       "' is not allowed with 'lattice/mesh file' (allowed: empty; the "
                       "boundary conditions apply on the whole boundary of a mesh)");
  }

  bool GeometrySettings::any_periodic() const
  {
    return std::find(periodic.begin(), periodic.end(), true) != periodic.end();
  }

  BoundaryConditions GeometrySettings::conditions(const Boundary     bracketing,
                                                  const unsigned int dimension) const
  {
    BoundaryConditions bcs(dimension, bracketing);
    for (unsigned int d = 0; d < dimension && d < periodic.size(); ++d)
      if (periodic[d])
        bcs[d] = Boundary::periodic;
    return bcs;
  }

  std::string GeometrySettings::description() const
  {
    if (has_mesh())
      return "mesh '" + mesh_file + "'" +
             (mesh_refinements > 0 ? " (" + std::to_string(mesh_refinements) + " refinement" +
                                       (mesh_refinements > 1 ? "s)" : ")")
                                   : std::string());
    std::string text;
    for (std::size_t d = 0; d < periodic.size(); ++d)
      if (periodic[d])
        text += (text.empty() ? "" : ", ") + std::string(direction_names[d]);
    return text.empty() ? text : "periodic in " + text;
  }
} // namespace alloyspec
