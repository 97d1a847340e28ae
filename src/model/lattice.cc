/** @file lattice.cc  The box of unit cells: parameters, indexing, geometry. */
#include <alloyspec/core/errors.h>
#include <alloyspec/model/lattice.h>

#include <deal.II/base/exceptions.h>
#include <deal.II/base/parameter_handler.h>
#include <deal.II/base/utilities.h>

#include <cmath>
#include <cstdint>
#include <sstream>

namespace alloyspec
{
  namespace
  {
    constexpr unsigned int max_cells_per_direction = 4096;
    /**
     * Cell indices travel as 32-bit words through the random stream and as
     * signed 32-bit integers through some linear-algebra back ends; 2^31 cells
     * is also far beyond what a finite-element eigenvalue solve can handle.
     */
    constexpr std::uint64_t max_total_cells = std::uint64_t(1) << 31;

    /** Throws InputError unless @p cells and @p cell_size describe a usable box. */
    void check_box(const std::vector<unsigned int> &cells, const double cell_size)
    {
      if (cells.empty() || cells.size() > 3)
        {
          std::ostringstream msg;
          msg << "lattice/cells: expected 1 to 3 integers (one per direction), got "
              << cells.size();
          throw InputError(msg.str());
        }
      std::uint64_t total = 1;
      for (unsigned int d = 0; d < cells.size(); ++d)
        {
          if (cells[d] < 1 || cells[d] > max_cells_per_direction)
            {
              std::ostringstream msg;
              msg << "lattice/cells: entry " << d + 1 << " is " << cells[d]
                  << ", allowed range is [1, " << max_cells_per_direction << "]";
              throw InputError(msg.str());
            }
          total *= cells[d]; // at most 4096^3 = 2^36: no overflow
        }
      if (total > max_total_cells)
        {
          std::ostringstream msg;
          msg << "lattice/cells: " << total << " cells in total, at most " << max_total_cells
              << " (2^31) are allowed";
          throw InputError(msg.str());
        }
      // Written as !(a >= min) so that NaN is rejected as well.
      if (!(cell_size >= min_cell_size && cell_size <= max_cell_size))
        {
          std::ostringstream msg;
          msg << "lattice/cell size: " << cell_size << " is not allowed (allowed: " << min_cell_size
              << " to " << max_cell_size
              << "; the kinetic energy of a cell, 1/a^2 in solver units, must stay within the "
                 "range the double-precision factorisations resolve)";
          throw InputError(msg.str());
        }
    }
  } // namespace


  Lattice::Lattice(const std::vector<unsigned int> &cells, const double cell_size)
    : cells_(cells)
    , cell_size_(cell_size)
  {
    check_box(cells_, cell_size_);
  }


  void Lattice::declare_parameters(dealii::ParameterHandler &prm)
  {
    using dealii::Patterns::Double;
    using dealii::Patterns::Integer;
    using dealii::Patterns::List;
    prm.enter_subsection("lattice");
    prm.declare_entry("cells",
                      "8, 8, 8",
                      List(Integer(1, max_cells_per_direction), 1, 3),
                      "Number of unit cells in each direction, L1[, L2[, L3]]. The number "
                      "of entries (1, 2 or 3) sets the space dimension. Each entry must lie "
                      "in [1, 4096] and the product must not exceed 2^31.");
    prm.declare_entry("cell size",
                      "1",
                      Double(0),
                      "Edge length a of one unit cell, in the length unit of the study "
                      "(0.01 to 1000). In reduced units (hbar^2/2m = 1, lengths in cells) this "
                      "is 1. The limits keep the cell's kinetic energy 1/a^2 (solver units) "
                      "between 1e-6 and 1e4, inside the range of potential values.");
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


  void Lattice::parse_parameters(dealii::ParameterHandler &prm)
  {
    prm.enter_subsection("lattice");
    const std::string cells_text = prm.get("cells");
    const double      cell_size  = prm.get_double("cell size");
    const std::string mesh_file  = prm.get("mesh file");
    const std::string refinements_text = prm.get("mesh refinements");
    prm.leave_subsection();

    constexpr long max_mesh_refinements = 4; // each multiplies the unknowns by 2^d
    std::size_t    used_digits          = 0;
    long           refinements          = -1;
    try
      {
        refinements = std::stol(refinements_text, &used_digits);
      }
    catch (const std::exception &)
      {
        used_digits = 0;
      }
    if (used_digits == 0 || refinements_text.find_first_not_of(" \t", used_digits) != std::string::npos ||
        refinements < 0 || refinements > max_mesh_refinements)
      throw InputError("parameter 'lattice/mesh refinements': '" + refinements_text +
                       "' is not allowed (an integer from 0 to " +
                       std::to_string(max_mesh_refinements) + ")");
    if (mesh_file.empty() && refinements > 0)
      throw InputError("parameter 'lattice/mesh refinements': " + refinements_text +
                       " is not allowed without 'lattice/mesh file' (allowed: 0; refine the "
                       "box with 'discretisation/elements per cell')");
    mesh_file_        = mesh_file;
    mesh_refinements_ = static_cast<unsigned int>(refinements);

    // The pattern has already checked each entry, but parse_parameters() must
    // not trust that the handler was filled through parse_input().
    std::vector<unsigned int> cells;
    for (const std::string &entry : dealii::Utilities::split_string_list(cells_text, ','))
      {
        long long value = 0;
        std::size_t used  = 0;
        try
          {
            value = std::stoll(entry, &used);
          }
        catch (const std::exception &)
          {
            used = 0;
          }
        if (used != entry.size() || value < 1 || value > max_cells_per_direction)
          throw InputError("lattice/cells: '" + entry +
                           "' is not an integer in the allowed range [1, 4096]");
        cells.push_back(static_cast<unsigned int>(value));
      }
    check_box(cells, cell_size);
    cells_     = std::move(cells);
    cell_size_ = cell_size;
  }


  std::size_t Lattice::n_cells() const
  {
    std::size_t n = 1;
    for (const unsigned int l : cells_)
      n *= l;
    return n;
  }


  std::size_t Lattice::cell_index(const std::array<unsigned int, 3> &c) const
  {
    std::size_t index  = 0;
    std::size_t stride = 1;
    for (unsigned int d = 0; d < cells_.size(); ++d)
      {
        AssertIndexRange(c[d], cells_[d]);
        index += stride * c[d];
        stride *= cells_[d];
      }
    return index;
  }


  std::array<unsigned int, 3> Lattice::cell_coordinates(std::size_t index) const
  {
    AssertIndexRange(index, n_cells());
    std::array<unsigned int, 3> c{{0, 0, 0}};
    for (unsigned int d = 0; d < cells_.size(); ++d)
      {
        c[d] = static_cast<unsigned int>(index % cells_[d]);
        index /= cells_[d];
      }
    return c;
  }


  double Lattice::volume() const
  {
    double v = 1.0;
    for (const unsigned int l : cells_)
      v *= l * cell_size_;
    return v;
  }


  std::vector<double> Lattice::extents() const
  {
    std::vector<double> e;
    e.reserve(cells_.size());
    for (const unsigned int l : cells_)
      e.push_back(l * cell_size_);
    return e;
  }


  std::string Lattice::description() const
  {
    std::ostringstream out;
    for (unsigned int d = 0; d < cells_.size(); ++d)
      out << (d > 0 ? " x " : "") << cells_[d];
    out << (n_cells() == 1 ? " cell" : " cells") << " of size " << cell_size_;
    return out.str();
  }
} // namespace alloyspec
