// Mixed face conditions (slabs, wires) against closed-form spectra, the
// parameters that choose them, and domains read from Gmsh files.
#include <alloyspec/fe/discretisation.h>
#include <alloyspec/solver/eigen_solver.h>
#include <alloyspec/core/errors.h>
#include <alloyspec/fe/geometry.h>
#include <alloyspec/model/lattice.h>
#include <alloyspec/fe/spectral_problem.h>

#include <deal.II/base/parameter_handler.h>

#include <gtest/gtest.h>

#include <algorithm>
#include <cmath>
#include <filesystem>
#include <fstream>
#include <memory>

namespace alloyspec
{
  namespace
  {
    constexpr double pi = 3.14159265358979323846;
    // Q3 with h = 1/2 on cells of size 1: the relative eigenvalue error
    // behaves like C (λh²)^3. Measured for the lowest 16 modes: 6.3e-4 at
    // most (slab, the modes near λ = 20 with wave number 4π/3 along x), 1.4e-4
    // (slab, Neumann) and 1.2e-4 (wire). The bound is far below the gaps
    // between clusters (≥ 5 %) and below what a wrong condition on one face
    // pair does (it moves the lowest mode by ≥ 25 %).
    constexpr double mixed_tolerance = 1.5e-3;
    constexpr double residual_tolerance = 1e-8;
    // Aligned mesh and box discretisation build the same matrices up to the
    // order of summation.
    constexpr double same_matrices_tolerance = 1e-9;

    /**
     * Closed form by separation of variables: on a product of intervals the
     * eigenvalues of -Δ are sums of 1D eigenvalues; per interval of length ℓ,
     * Dirichlet π²n²/ℓ² (n ≥ 1), Neumann π²n²/ℓ² (n ≥ 0), periodic
     * 4π²m²/ℓ² (m ∈ ℤ) (Courant & Hilbert, Methods of Mathematical Physics,
     * vol. 1, ch. V).
     */
    std::vector<double> one_d(double length, Boundary bc, int n_max)
    {
      std::vector<double> values;
      if (bc == Boundary::periodic)
        for (int m = -n_max; m <= n_max; ++m)
          values.push_back(4 * pi * pi * m * m / (length * length));
      else
        for (int n = bc == Boundary::dirichlet ? 1 : 0; n <= n_max; ++n)
          values.push_back(pi * pi * n * n / (length * length));
      return values;
    }

    std::vector<double> product_spectrum(const std::vector<double> &lengths,
                                         const BoundaryConditions &bcs, std::size_t count)
    {
      std::vector<double> all{0.0};
      for (std::size_t d = 0; d < lengths.size(); ++d)
        {
          std::vector<double> next;
          for (const double a : all)
            for (const double b : one_d(lengths[d], bcs[d], 12))
              next.push_back(a + b);
          all = std::move(next);
        }
      std::sort(all.begin(), all.end());
      all.resize(count);
      return all;
    }

    EigenResult solve(Discretisation &d, const std::vector<double> &q, unsigned int k)
    {
      d.make_grid();
      d.setup_system();
      d.assemble_fixed();
      auto problem = d.make_problem();
      d.assemble_potential(q, *problem);
      EigenSolverSettings es;
      es.n_eigenvalues = k;
      EigenSolver solver(es);
      return solver.solve(*problem);
    }

    void check_against_closed_form(const Lattice &lattice, const BoundaryConditions &bcs)
    {
      DiscretisationSettings ds;
      ds.degree            = 3;
      ds.elements_per_cell = 2;
      auto d               = Discretisation::create(lattice, ds, bcs);
      const EigenResult r  = solve(*d, std::vector<double>(lattice.n_cells(), 0.0), 16);
      ASSERT_GE(r.eigenvalues.size(), 16u);
      const auto exact = product_spectrum(lattice.extents(), bcs, r.eigenvalues.size());
      double     worst = 0;
      for (std::size_t i = 0; i < r.eigenvalues.size(); ++i)
        {
          const double scale = std::max(exact[i], 1.0);
          EXPECT_NEAR(r.eigenvalues[i], exact[i], mixed_tolerance * scale) << "mode " << i;
          // Rayleigh–Ritz: discrete eigenvalues lie above the exact ones.
          EXPECT_GE(r.eigenvalues[i], exact[i] - 1e-9) << "mode " << i;
          EXPECT_LT(r.residuals[i], residual_tolerance);
          worst = std::max(worst, std::abs(r.eigenvalues[i] - exact[i]) / scale);
        }
      EXPECT_EQ(r.inertia_count, r.eigenvalues.size());
      // The true volume normalises the IDS.
      EXPECT_DOUBLE_EQ(d->volume(), lattice.volume());
      std::cout << "largest relative eigenvalue error " << worst << '\n';
    }

    /** Writes a Gmsh 2.2 file of the rectangle [0, w] x [0, h] split into nx x ny quadrilaterals. */
    std::string write_rectangle_mesh(const std::string &name, double w, double h, unsigned nx,
                                     unsigned ny)
    {
      const std::string path = (std::filesystem::temp_directory_path() / name).string();
      std::ofstream     out(path);
      out << "$MeshFormat\n2.2 0 8\n$EndMeshFormat\n$Nodes\n" << (nx + 1) * (ny + 1) << '\n';
      for (unsigned j = 0; j <= ny; ++j)
        for (unsigned i = 0; i <= nx; ++i)
          out << 1 + i + j * (nx + 1) << ' ' << w * i / nx << ' ' << h * j / ny << " 0\n";
      out << "$EndNodes\n$Elements\n" << nx * ny << '\n';
      for (unsigned j = 0; j < ny; ++j)
        for (unsigned i = 0; i < nx; ++i)
          {
            const unsigned a = 1 + i + j * (nx + 1);
            out << 1 + i + j * nx << " 3 2 1 1 " << a << ' ' << a + 1 << ' ' << a + nx + 2 << ' '
                << a + nx + 1 << '\n';
          }
      out << "$EndElements\n";
      return path;
    }
  } // namespace

  TEST(PeriodicDirections, SlabOfFreeCellsHasTheProductSpectrum)
  {
    // Periodic in x and y, Dirichlet or Neumann on the faces normal to z.
    const Lattice lattice({3, 2, 2});
    for (const Boundary bc : {Boundary::dirichlet, Boundary::neumann})
      check_against_closed_form(lattice, {Boundary::periodic, Boundary::periodic, bc});
  }

  TEST(PeriodicDirections, WireOfFreeCellsHasTheProductSpectrum)
  {
    // A wire along z: Dirichlet on the four side faces, periodic along it.
    const Lattice lattice({2, 3, 4});
    check_against_closed_form(lattice, {Boundary::dirichlet, Boundary::dirichlet, Boundary::periodic});
  }

  TEST(GeometrySettings, PeriodicDirectionsSetTheFaceConditions)
  {
    const Lattice    lattice({4, 4, 2});
    GeometrySettings g;
    g.configure(lattice, "x, y");
    EXPECT_EQ(g.conditions(Boundary::neumann, 3),
              (BoundaryConditions{Boundary::periodic, Boundary::periodic, Boundary::neumann}));
    EXPECT_EQ(g.description(), "periodic in x, y");

    for (const char *bad : {"w", "x, x", "x,,y"})
      EXPECT_THROW(g.configure(lattice, bad), InputError) << bad;
    // z does not exist in 2D.
    EXPECT_THROW(g.configure(Lattice({4, 4}), "z"), InputError);

    // Periodic faces and a mesh file do not mix; refinements need a mesh.
    // Both entries belong to subsection `lattice`, parsed by Lattice.
    dealii::ParameterHandler prm;
    Lattice::declare_parameters(prm);
    prm.enter_subsection("lattice");
    prm.set("cells", "4, 4, 2");
    prm.set("mesh file", "some.msh");
    prm.leave_subsection();
    Lattice with_mesh;
    with_mesh.parse_parameters(prm);
    EXPECT_THROW(g.configure(with_mesh, "x"), InputError);
    prm.enter_subsection("lattice");
    prm.set("mesh file", "");
    prm.set("mesh refinements", "1");
    prm.leave_subsection();
    Lattice refined_box;
    EXPECT_THROW(refined_box.parse_parameters(prm), InputError);
  }

  // A mesh aligned with the box discretisation (2 x 2 elements per cell)
  // gives the same matrices, hence the same spectrum, for any cell values.
  TEST(MeshFile, AlignedMeshReproducesTheBoxDiscretisation)
  {
    const Lattice             lattice({3, 2});
    const std::vector<double> q{0.3, 1.7, 0.0, 2.2, 0.9, 1.1};
    const std::string         mesh = write_rectangle_mesh("alloyspec_aligned.msh", 3, 2, 6, 4);
    DiscretisationSettings    ds;
    ds.degree            = 2;
    ds.elements_per_cell = 2;
    for (const Boundary bc : {Boundary::dirichlet, Boundary::neumann})
      {
        auto box       = Discretisation::create(lattice, ds, BoundaryConditions(2, bc));
        auto from_mesh = Discretisation::create_from_mesh(lattice, ds, mesh, 0, bc);
        const auto a   = solve(*box, q, 12);
        const auto b   = solve(*from_mesh, q, 12);
        ASSERT_EQ(a.eigenvalues.size(), b.eigenvalues.size());
        for (std::size_t i = 0; i < a.eigenvalues.size(); ++i)
          EXPECT_NEAR(a.eigenvalues[i], b.eigenvalues[i], same_matrices_tolerance * (1 + a.eigenvalues[i]));
        EXPECT_NEAR(from_mesh->volume(), 6.0, 1e-12);
        EXPECT_TRUE(from_mesh->notes().empty());
        const auto cells = from_mesh->cell_volumes();
        for (const double v : cells)
          EXPECT_NEAR(v, 1.0, 1e-12);
      }
  }

  TEST(MeshFile, StraddlingElementsAreCountedAndOutsideMeshesRefused)
  {
    const Lattice          lattice({2, 2});
    DiscretisationSettings ds;
    // 3 x 3 elements on 2 x 2 cells: the middle row and column straddle the
    // cell faces x = 1 and y = 1: 5 of 9 elements.
    auto d = Discretisation::create_from_mesh(
      lattice, ds, write_rectangle_mesh("alloyspec_straddle.msh", 2, 2, 3, 3), 0, Boundary::dirichlet);
    d->make_grid();
    ASSERT_EQ(d->notes().size(), 1u);
    EXPECT_NE(d->notes()[0].find("5 of 9 elements"), std::string::npos) << d->notes()[0];

    auto outside = Discretisation::create_from_mesh(
      lattice, ds, write_rectangle_mesh("alloyspec_outside.msh", 2.5, 2, 5, 4), 0,
      Boundary::dirichlet);
    EXPECT_THROW(outside->make_grid(), InputError);
    auto missing = Discretisation::create_from_mesh(lattice, ds, "/nonexistent/file.msh", 0,
                                                    Boundary::neumann);
    EXPECT_THROW(missing->make_grid(), InputError);
    EXPECT_THROW(Discretisation::create_from_mesh(lattice, ds, "x.msh", 0, Boundary::periodic),
                 InputError);
  }
} // namespace alloyspec
