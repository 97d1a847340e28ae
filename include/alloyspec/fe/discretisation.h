/** @file discretisation.h  Finite-element space on a box of cells, and the matrices of H. */
#pragma once

#include <alloyspec/model/boundary.h>

#include <mpi.h>

#include <cstddef>
#include <array>
#include <memory>
#include <optional>
#include <string>
#include <vector>

namespace dealii
{
  class ParameterHandler;
}

namespace alloyspec
{
  class Lattice;

  /**
   * Subsection `discretisation`: degree and mesh density, and how the
   * discretisation error is estimated or targeted (used by ErrorEstimateSettings).
   */
  struct DiscretisationSettings
  {
    /** The space FE_Q(@p p) with @p r elements per cell edge, no error estimate. */
    DiscretisationSettings(unsigned int p = 2, unsigned int r = 2)
      : degree(p)
      , elements_per_cell(r)
    {}

    unsigned int degree;            ///< p of FE_Q(p), 1..4
    unsigned int elements_per_cell; ///< r elements per cell edge, 1..8
    /** `error estimate`: "none" or "richardson". */
    std::string           error_estimate = "none";
    /** `accuracy`: relative target in [1e-12, 0.1]; empty: keep degree and r. */
    std::optional<double> accuracy;

    static void declare_parameters(dealii::ParameterHandler &prm);
    void        parse_parameters(dealii::ParameterHandler &prm);
  };

  /** One boundary condition per coordinate direction (both faces alike). */
  using BoundaryConditions = std::vector<Boundary>;

  class Discretisation;
  struct SpectralProblem;

  /**
   * Continuous Lagrange elements FE_Q(p) on a mesh aligned with the lattice:
   * each unit cell is split into @f$r^d@f$ equal elements, so the cell potential
   * jumps only across element faces and Q_p keeps its full order
   * @f$O(h^{2p})@f$ for eigenvalues.
   *
   * Fixed parts are assembled once: the stiffness matrix
   * @f$A_{ij} = \int \nabla\varphi_i\cdot\nabla\varphi_j@f$, the mass matrix
   * @f$M_{ij} = \int \varphi_i\varphi_j@f$, and the element mass matrix (the
   * same for every element of the uniform mesh). A realisation only adds
   * @f$\sum_n q_n \int_{\text{cell } n}\varphi_i\varphi_j@f$.
   *
   * Constrained degrees of freedom (Dirichlet faces, periodic images) keep a
   * diagonal entry @f$K_{ii} = \mu@f$, @f$M_{ii} = 1@f$ with @f$\mu@f$ above the
   * whole discrete spectrum (twice the trace of @f$M_e^{-1}K_e@f$, which bounds
   * the largest element eigenvalue, plus the largest potential value), so they
   * create eigenvalues only at @f$\mu@f$, far outside every range we compute.
   */
  class Discretisation
  {
  public:
    /** Box of @p lattice with one condition per direction (size = dimension). */
    static std::unique_ptr<Discretisation> create(const Lattice &                lattice,
                                                  const DiscretisationSettings &settings,
                                                  const BoundaryConditions &    bcs);
    /**
     * The domain of a Gmsh mesh file (quadrilaterals in 2D, hexahedra in 3D,
     * of the lattice's dimension), refined @p refinements times, with @p bc
     * (Dirichlet or Neumann) on its whole boundary. Elements take the cell
     * value of the lattice cell containing their centre; the mesh must lie in
     * the box of @p lattice (InputError otherwise, also for an unreadable file).
     * `discretisation/elements per cell` is not used. Implemented in
     * mesh_discretisation.cc.
     */
    static std::unique_ptr<Discretisation> create_from_mesh(const Lattice &                lattice,
                                                            const DiscretisationSettings &settings,
                                                            const std::string &           mesh_file,
                                                            unsigned int                  refinements,
                                                            Boundary                      bc);
    /**
     * The box of @p lattice (2D or 3D) on a distributed mesh over @p comm
     * (deal.II's p4est triangulation; distributed_box.cc): each rank holds
     * its own elements, a ghost layer, and its rows of K and M, with
     * constraints on its locally relevant DoFs. The same space, constraints
     * and pushed-out value μ as create(), so the same genuine eigenvalues.
     * Differences, all collective over @p comm: assemble_potential() takes
     * the values of local_cells() only; make_problem() gives a problem with
     * SpectralProblem::distributed set; localisation_measures() takes each
     * rank's owned rows; slice_values() gives every sample on rank 0 of
     * @p comm; load_vector() gives this rank's rows, and quadrature_values()
     * takes this rank's rows and gives the points of its own elements.
     * complete() and write_vtu() are for serial meshes only (std::logic_error).
     */
    static std::unique_ptr<Discretisation> create_distributed(const Lattice &                lattice,
                                                              const DiscretisationSettings &settings,
                                                              const BoundaryConditions &    bcs,
                                                              MPI_Comm                      comm);
    virtual ~Discretisation() = default;

    /** True for a distributed mesh (create_distributed()). */
    virtual bool distributed() const { return false; }
    /** The ranks that share the mesh: MPI_COMM_SELF for a serial one. */
    virtual MPI_Comm communicator() const { return MPI_COMM_SELF; }
    /**
     * A distributed mesh: the lattice cells (Lattice::cell_index) of this
     * rank's elements, ascending, in the order assemble_potential() takes
     * their values. A serial mesh: empty (assemble_potential() takes every cell).
     */
    virtual std::vector<std::size_t> local_cells() const { return {}; }

    /** Builds the mesh aligned with the cells. */
    virtual void make_grid() = 0;
    /** Distributes DoFs, builds constraints and the sparsity pattern. */
    virtual void setup_system() = 0;
    /** Assembles the realisation-independent matrices. */
    virtual void assemble_fixed() = 0;

    /** Overwrites @p problem.K with @f$A + \sum_n q_n M_n@f$ (M is untouched). */
    virtual void assemble_potential(const std::vector<double> &cell_values,
                                    SpectralProblem &          problem) const = 0;
    /** Allocates K and M with the right pattern and copies the fixed mass matrix into M. */
    virtual std::unique_ptr<SpectralProblem> make_problem() const = 0;

    /** @f$|\Omega| = \sum_e |e|@f$, the measure of the domain (for a box: that of the box). */
    virtual double volume() const = 0;
    /**
     * Per lattice cell (Lattice::cell_index order), the measure of the part of
     * the domain whose potential is that cell's value: @f$a^d@f$ for every
     * cell of a box; for a mesh, the summed volumes of the elements whose
     * centre lies in the cell (0 for cells outside the mesh).
     */
    virtual std::vector<double> cell_volumes() const = 0;
    /**
     * Load vector @f$b_i = \int_\Omega \varphi_i\,dx@f$ of the constant 1,
     * condensed with the constraints (0 at constrained DoFs), so that
     * @f$K u = b@f$ is the Galerkin form of @f$(-\Delta + V)u = 1@f$.
     */
    virtual std::vector<double> load_vector() const = 0;
    /** @p u with its constrained entries set from the constraints (periodic images, zeros). */
    virtual std::vector<double> complete(const std::vector<double> &u) const = 0;
    /**
     * Values of the discrete function @p u (DoF values, completed) at every
     * Gauss point (p+1 per direction) of every element, with the weights
     * @f$|J|w@f$, so that @f$\sum_k f(\text{values}_k)\,\text{weights}_k \approx \int f(u)@f$.
     */
    virtual void quadrature_values(const std::vector<double> &u, std::vector<double> &values,
                                   std::vector<double> &weights) const = 0;
    /** Remarks on the geometry worth telling the user (e.g. elements straddling cell faces). */
    virtual std::vector<std::string> notes() const { return {}; }

    virtual std::size_t n_dofs() const = 0;
    virtual std::size_t n_constrained_dofs() const = 0;
    virtual std::size_t n_elements() const = 0;
    /** Value μ of the pushed-out constrained eigenvalues for this potential bound. */
    virtual double spurious_eigenvalue(double potential_max) const = 0;

    /**
     * Inverse participation ratio @f$\int|\psi|^4 / (\int|\psi|^2)^2@f$ of a
     * discrete function given by its DoF values, by Gauss quadrature with p+2
     * points per direction (exact for the quartic in 1D, accurate to rounding in 2D/3D).
     */
    virtual double inverse_participation_ratio(const std::vector<double> &u) const = 0;

    /**
     * Share @f$\int_{\text{cell}}|u|^2 / \int_\Omega |u|^2@f$ of the lattice cell
     * @p cell (elements whose centre lies in it), by Gauss quadrature with p+1
     * points per direction (exact for |u|² on the affine elements of a box).
     */
    virtual double cell_weight(const std::vector<double> &u, std::size_t cell) const = 0;

    /**
     * inverse_participation_ratio() and cell_weight(@p lattice_cell) of every
     * vector in @p vectors, into @p ipr and @p weight, in one pass over the
     * elements (one FEValues set-up per element for all vectors).
     */
    virtual void localisation_measures(const std::vector<std::vector<double>> &vectors,
                                       std::size_t lattice_cell, std::vector<double> &ipr,
                                       std::vector<double> &weight) const = 0;

    /**
     * Values of the discrete function @p u (DoF values) on a grid of (p+2)^d
     * points per element, as (x, y, u) triples: along the line in 1D (y = 0),
     * over the domain in 2D, and on the plane z = mid-height of the domain in
     * 3D (elements are taken as straight along z, true on boxes), for maps.
     */
    virtual std::vector<std::array<double, 3>> slice_values(const std::vector<double> &u) const = 0;

    /**
     * Writes @p fields (DoF vectors with names) and the cell potential as a cell
     * field to a VTU file.
     */
    virtual void write_vtu(const std::string &                path,
                           const std::vector<double> &        cell_values,
                           const std::vector<std::string> &   names,
                           const std::vector<std::vector<double>> &fields) const = 0;
  };
} // namespace alloyspec
