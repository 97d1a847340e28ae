/**
 * @file mesh_discretisation.cc  Q_p elements on a domain read from a Gmsh
 * file, with the cell potential of the lattice that contains it.
 */
#include <alloyspec/fe/discretisation.h>
#include <alloyspec/core/errors.h>
#include <alloyspec/model/lattice.h>

#include "cellwise_discretisation.h"

#include <deal.II/base/exceptions.h>
#include <deal.II/grid/grid_in.h>
#include <deal.II/grid/grid_tools.h>

#include <filesystem>
#include <fstream>
#include <sstream>

namespace alloyspec
{
  namespace
  {
    /**
     * Vertices this far outside the box (relative to the cell size) still count
     * as inside: mesh files store coordinates with a few significant digits.
     * Common practice, no source.
     */
    constexpr double containment_tolerance = 1e-6;

    std::string describe(const dealii::ExceptionBase &e)
    {
      std::ostringstream out;
      e.print_info(out);
      std::string text = out.str();
      while (!text.empty() && (text.back() == '\n' || text.back() == ' '))
        text.pop_back();
      return text.substr(std::min(text.size(), text.find_first_not_of(" \n")));
    }

    /**
     * Elements of varying shape, so one pair of element matrices per element.
     * Gmsh meshes are conforming and refined globally, so there are no hanging
     * nodes; Dirichlet applies to every boundary face, whatever its id.
     */
    template <int dim>
    class MeshDiscretisation final : public internal::CellwiseDiscretisation<dim>
    {
      using Base = internal::CellwiseDiscretisation<dim>;

    public:
      MeshDiscretisation(const Lattice &lattice, const DiscretisationSettings &settings,
                         std::string mesh_file, unsigned int refinements, Boundary bc)
        : Base(lattice, settings)
        , mesh_file_(std::move(mesh_file))
        , refinements_(refinements)
        , bc_(bc)
      {}

      void make_grid() override
      {
        const std::string parameter = "lattice/mesh file";
        std::ifstream     in(mesh_file_);
        if (!in)
          throw InputError("parameter '" + parameter + "': cannot open '" + mesh_file_ +
                           "' (allowed: a readable Gmsh .msh file)");
        try
          {
            dealii::GridIn<dim> grid_in;
            grid_in.attach_triangulation(this->triangulation_);
            grid_in.read_msh(in);
          }
        catch (const dealii::ExceptionBase &e)
          {
            throw InputError("parameter '" + parameter + "': '" + mesh_file_ +
                             "' is not a Gmsh mesh of " + std::to_string(dim) +
                             "D elements (quadrilaterals in 2D, hexahedra in 3D) matching "
                             "'lattice/cells': " + describe(e));
          }
        if (this->triangulation_.n_active_cells() == 0)
          throw InputError("parameter '" + parameter + "': '" + mesh_file_ +
                           "' holds no element of dimension " + std::to_string(dim));
        this->triangulation_.refine_global(refinements_);
        check_containment();
        count_straddling();
      }

      std::vector<std::string> notes() const override { return notes_; }

    protected:
      void make_constraints() override
      {
        if (bc_ == Boundary::dirichlet)
          for (const auto id : this->triangulation_.get_boundary_ids())
            dealii::DoFTools::make_zero_boundary_constraints(this->dof_handler_, id,
                                                             this->constraints_);
      }

      void compute_element_matrices() override
      {
        masses_.resize(this->triangulation_.n_active_cells());
        stiffnesses_.resize(masses_.size());
        this->element_bound_      = 0;
        this->element_mass_floor_ = std::numeric_limits<double>::infinity();
        std::size_t e             = 0;
        for (const auto &cell : this->dof_handler_.active_cell_iterators())
          {
            this->local_matrices(cell, masses_[e], stiffnesses_[e]);
            this->element_bound_ =
              std::max(this->element_bound_, Base::pencil_bound(masses_[e], stiffnesses_[e]));
            this->element_mass_floor_ =
              std::min(this->element_mass_floor_, Base::smallest_eigenvalue(masses_[e]));
            ++e;
          }
      }

      const dealii::FullMatrix<double> &element_mass(std::size_t e) const override
      {
        return masses_[e];
      }
      const dealii::FullMatrix<double> &element_stiffness(std::size_t e) const override
      {
        return stiffnesses_[e];
      }

    private:
      /** Every vertex must lie in the box of the lattice, which carries the potential. */
      void check_containment() const
      {
        const double a   = this->lattice_.cell_size();
        const double tol = containment_tolerance * a;
        for (const auto &v : this->triangulation_.get_vertices())
          for (unsigned int d = 0; d < dim; ++d)
            if (v[d] < -tol || v[d] > this->lattice_.cells()[d] * a + tol)
              {
                std::ostringstream msg;
                msg << "parameter 'lattice/mesh file': the mesh '" << mesh_file_
                    << "' has a vertex at (" << v << "), outside the box of the lattice, [0, "
                    << this->lattice_.cells()[0] * a << "]";
                for (unsigned int k = 1; k < dim; ++k)
                  msg << " x [0, " << this->lattice_.cells()[k] * a << "]";
                msg << " (allowed: a mesh inside the box of 'lattice/cells' x 'lattice/cell "
                       "size', which carries the potential)";
                throw InputError(msg.str());
              }
      }

      /**
       * An element whose vertices are not all in the closed cell of its centre
       * straddles a cell face: it gets one value, so the potential is not
       * exactly the cell-wise constant one there. Counted, with its volume.
       */
      void count_straddling()
      {
        const double a         = this->lattice_.cell_size();
        const double tol       = containment_tolerance * a;
        std::size_t  straddling = 0;
        double       volume = 0, straddling_volume = 0;
        for (const auto &cell : this->triangulation_.active_cell_iterators())
          {
            const auto centre = cell->center();
            bool       inside = true;
            for (unsigned int d = 0; d < dim; ++d)
              {
                const double low = std::floor(centre[d] / a) * a;
                for (const unsigned int v : cell->vertex_indices())
                  inside = inside && cell->vertex(v)[d] >= low - tol &&
                           cell->vertex(v)[d] <= low + a + tol;
              }
            volume += cell->measure();
            if (!inside)
              ++straddling, straddling_volume += cell->measure();
          }
        if (straddling > 0)
          {
            std::ostringstream note;
            note << straddling << " of " << this->triangulation_.n_active_cells()
                 << " elements of the mesh '" << std::filesystem::path(mesh_file_).filename().string()
                 << "' (" << 100.0 * straddling_volume / volume
                 << " % of its volume) straddle faces of lattice cells; each takes the value of "
                    "the cell containing its centre, so the potential is not exactly cell-wise "
                    "constant there (a mesh aligned with the cells avoids this)";
            notes_.push_back(note.str());
          }
      }

      const std::string                        mesh_file_;
      const unsigned int                       refinements_;
      const Boundary                           bc_;
      std::vector<dealii::FullMatrix<double>> masses_, stiffnesses_;
      std::vector<std::string>                notes_;
    };
  } // namespace

  std::unique_ptr<Discretisation> Discretisation::create_from_mesh(const Lattice &lattice,
                                                                   const DiscretisationSettings &settings,
                                                                   const std::string &mesh_file,
                                                                   const unsigned int refinements,
                                                                   const Boundary     bc)
  {
    if (bc == Boundary::periodic)
      throw InputError("parameter 'spectrum/boundary conditions': 'periodic' is not allowed with "
                       "'lattice/mesh file' (allowed: dirichlet, neumann)");
    switch (lattice.dimension())
      {
        case 2:
          return std::make_unique<MeshDiscretisation<2>>(lattice, settings, mesh_file, refinements, bc);
        case 3:
          return std::make_unique<MeshDiscretisation<3>>(lattice, settings, mesh_file, refinements, bc);
        default:
          throw InputError("parameter 'lattice/mesh file': a mesh needs a lattice of dimension 2 "
                           "or 3 (allowed: 'lattice/cells' with 2 or 3 entries)");
      }
  }
} // namespace alloyspec
