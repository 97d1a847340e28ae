#include <alloyspec/core/errors.h>
#include <alloyspec/model/boundary.h>

namespace alloyspec
{
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
} // namespace alloyspec
