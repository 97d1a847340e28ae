/** @file geometry.cc  Periodic directions and the mesh file: parameters. */
#include <alloyspec/core/errors.h>
#include <alloyspec/fe/geometry.h>
#include <alloyspec/model/lattice.h>

#include <deal.II/base/parameter_handler.h>
#include <deal.II/base/utilities.h>

#include <algorithm>

namespace alloyspec
{
  namespace
  {
    constexpr unsigned int max_mesh_refinements = 4;
    const char *const      direction_names[]    = {"x", "y", "z"};
  } // namespace

  void GeometrySettings::declare_parameters(dealii::ParameterHandler &prm)
  {
    prm.enter_subsection("spectrum");
    prm.declare_entry("periodic directions", "", dealii::Patterns::Anything(),
                      "Directions (a list of x, y, z) that are periodic in every solve; the "
                      "conditions of 'boundary conditions' then apply to the faces of the other "
                      "directions only. Empty: none. A slab: 'x, y'; a wire along z: 'z'. Not "
                      "allowed together with 'lattice/mesh file'.");
    prm.leave_subsection();
    prm.enter_subsection("lattice");
    prm.declare_entry("mesh file", "", dealii::Patterns::Anything(),
                      "Gmsh .msh file of the domain (quadrilaterals in 2D, hexahedra in 3D), in "
                      "the length unit of the study (nm in physical units), inside the box of "
                      "'cells' x 'cell size', which then only sets the grid of the cell "
                      "potential. Each element takes the value of the cell containing its "
                      "centre. The boundary conditions apply on the whole boundary of the mesh. "
                      "Empty: the box itself. A relative path written in a parameter file is "
                      "taken from that file's folder; one given with --set, from the working "
                      "directory.");
    prm.declare_entry("mesh refinements", "0", dealii::Patterns::Anything(),
                      "Number of global refinements of the mesh read from 'mesh file' (0 to 4); "
                      "each halves the element size.");
    prm.leave_subsection();
  }

  void GeometrySettings::parse_parameters(dealii::ParameterHandler &prm, const Lattice &lattice)
  {
    const unsigned int dim = lattice.dimension();
    prm.enter_subsection("spectrum");
    const std::string directions = prm.get("periodic directions");
    prm.leave_subsection();
    prm.enter_subsection("lattice");
    mesh_file                          = prm.get("mesh file");
    const std::string refinements_text = prm.get("mesh refinements");
    prm.leave_subsection();

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

    std::size_t used = 0;
    long        n    = -1;
    try
      {
        n = std::stol(refinements_text, &used);
      }
    catch (const std::exception &)
      {
        used = 0;
      }
    if (used == 0 || refinements_text.find_first_not_of(" \t", used) != std::string::npos ||
        n < 0 || n > static_cast<long>(max_mesh_refinements))
      throw InputError("parameter 'lattice/mesh refinements': '" + refinements_text +
                       "' is not allowed (an integer from 0 to " +
                       std::to_string(max_mesh_refinements) + ")");
    mesh_refinements = static_cast<unsigned int>(n);

    if (has_mesh() && any_periodic())
      throw InputError("parameter 'spectrum/periodic directions': '" + directions +
                       "' is not allowed with 'lattice/mesh file' (allowed: empty; the "
                       "boundary conditions apply on the whole boundary of a mesh)");
    if (!has_mesh() && mesh_refinements > 0)
      throw InputError("parameter 'lattice/mesh refinements': " + refinements_text +
                       " is not allowed without 'lattice/mesh file' (allowed: 0; refine the "
                       "box with 'discretisation/elements per cell')");
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
