// Unit tests of Lattice: indexing, geometry, parameters and their validation.
#include <alloyspec/core/errors.h>
#include <alloyspec/model/lattice.h>

#include <deal.II/base/parameter_handler.h>

#include <gtest/gtest.h>

#include <cmath>

#include <sstream>
#include <string>

namespace
{
  using alloyspec::InputError;
  using alloyspec::Lattice;

  // Volumes and extents are products of a few exactly representable numbers,
  // so only rounding of the last bit is expected.
  constexpr double geometry_tolerance = 1e-12;

  /** Runs parse_parameters() on a "lattice" subsection given as text. */
  Lattice parse(const std::string &body)
  {
    dealii::ParameterHandler prm;
    Lattice::declare_parameters(prm);
    prm.parse_input_from_string("subsection lattice\n" + body + "\nend\n");
    Lattice lattice;
    lattice.parse_parameters(prm);
    return lattice;
  }

  /** The InputError message of @p f, or "" if it does not throw one. */
  template <typename F>
  std::string input_error_message(F f)
  {
    try
      {
        f();
      }
    catch (const InputError &e)
      {
        return e.what();
      }
    return "";
  }
} // namespace


TEST(Lattice, DefaultIsEightCubed)
{
  const Lattice lattice;
  EXPECT_EQ(lattice.dimension(), 3u);
  EXPECT_EQ(lattice.n_cells(), 512u);
  EXPECT_DOUBLE_EQ(lattice.cell_size(), 1.0);
  EXPECT_EQ(lattice.description(), "8 x 8 x 8 cells of size 1");
}


TEST(Lattice, IndexIsLexicographicFirstIndexFastest)
{
  const Lattice lattice({3, 4, 5});
  // n = i + L1 (j + L2 k)
  EXPECT_EQ(lattice.cell_index({{0, 0, 0}}), 0u);
  EXPECT_EQ(lattice.cell_index({{1, 0, 0}}), 1u);
  EXPECT_EQ(lattice.cell_index({{0, 1, 0}}), 3u);
  EXPECT_EQ(lattice.cell_index({{0, 0, 1}}), 12u);
  EXPECT_EQ(lattice.cell_index({{2, 3, 4}}), 2u + 3u * (3u + 4u * 4u));
  EXPECT_EQ(lattice.cell_index({{2, 3, 4}}), lattice.n_cells() - 1);
}


TEST(Lattice, CoordinatesInvertIndexInEveryDimension)
{
  for (const std::vector<unsigned int> &cells :
       {std::vector<unsigned int>{7}, std::vector<unsigned int>{3, 5},
        std::vector<unsigned int>{2, 3, 4}})
    {
      const Lattice lattice(cells);
      for (std::size_t n = 0; n < lattice.n_cells(); ++n)
        {
          const std::array<unsigned int, 3> c = lattice.cell_coordinates(n);
          EXPECT_EQ(lattice.cell_index(c), n);
          for (unsigned int d = 0; d < 3; ++d)
            {
              if (d < lattice.dimension())
                EXPECT_LT(c[d], cells[d]);
              else
                EXPECT_EQ(c[d], 0u) << "unused coordinates must be 0";
            }
        }
    }
}


TEST(Lattice, UnusedCoordinatesAreIgnored)
{
  const Lattice lattice({6, 2});
  EXPECT_EQ(lattice.cell_index({{4, 1, 99}}), lattice.cell_index({{4, 1, 0}}));
}


TEST(Lattice, GeometryScalesWithCellSize)
{
  const Lattice lattice({4, 2, 3}, 0.5);
  EXPECT_EQ(lattice.n_cells(), 24u);
  EXPECT_NEAR(lattice.volume(), 24 * 0.125, geometry_tolerance);
  const std::vector<double> e = lattice.extents();
  ASSERT_EQ(e.size(), 3u);
  EXPECT_NEAR(e[0], 2.0, geometry_tolerance);
  EXPECT_NEAR(e[1], 1.0, geometry_tolerance);
  EXPECT_NEAR(e[2], 1.5, geometry_tolerance);
  EXPECT_EQ(lattice.description(), "4 x 2 x 3 cells of size 0.5");

  const Lattice line({10}, 2.0);
  EXPECT_EQ(line.dimension(), 1u);
  EXPECT_NEAR(line.volume(), 20.0, geometry_tolerance);
}


TEST(Lattice, ParsesDefaultsAndExplicitValues)
{
  const Lattice defaults = parse("");
  EXPECT_EQ(defaults.cells(), (std::vector<unsigned int>{8, 8, 8}));
  EXPECT_DOUBLE_EQ(defaults.cell_size(), 1.0);

  const Lattice lattice = parse("set cells = 16, 4\nset cell size = 0.25");
  EXPECT_EQ(lattice.cells(), (std::vector<unsigned int>{16, 4}));
  EXPECT_EQ(lattice.dimension(), 2u);
  EXPECT_DOUBLE_EQ(lattice.cell_size(), 0.25);
}


TEST(Lattice, ParameterDescriptionsAreNotEmpty)
{
  dealii::ParameterHandler prm;
  Lattice::declare_parameters(prm);
  std::ostringstream out;
  prm.print_parameters(out, dealii::ParameterHandler::Text);
  EXPECT_NE(out.str().find("set cells"), std::string::npos);
  EXPECT_NE(out.str().find("Number of unit cells"), std::string::npos);
  EXPECT_NE(out.str().find("Edge length"), std::string::npos);
}


TEST(Lattice, PatternRejectsOutOfRangeCellCounts)
{
  // The bounded pattern stops these before parse_parameters() runs.
  EXPECT_ANY_THROW(parse("set cells = 0, 8"));
  EXPECT_ANY_THROW(parse("set cells = 4097"));
  EXPECT_ANY_THROW(parse("set cells = 2, 2, 2, 2"));
  EXPECT_ANY_THROW(parse("set cell size = -1"));
}


TEST(Lattice, CellSizeOutsideItsRangeIsAnInputError)
{
  const std::string message = input_error_message([] { parse("set cell size = 0"); });
  EXPECT_NE(message.find("lattice/cell size"), std::string::npos) << message;
  EXPECT_NE(message.find("0.01 to 1000"), std::string::npos) << message;
  EXPECT_THROW(Lattice({4}, -1.0), InputError);
  // Inside the pattern (> 0) but outside what the numerics take (issue: 1e-300
  // and 1e300 ended in a solver dump with exit status 1).
  EXPECT_THROW(Lattice({4}, 1e-300), InputError);
  EXPECT_THROW(Lattice({4}, 1e300), InputError);
  EXPECT_THROW(Lattice({4}, std::nan("")), InputError);
  EXPECT_NO_THROW(Lattice({4}, alloyspec::min_cell_size));
  EXPECT_NO_THROW(Lattice({4}, alloyspec::max_cell_size));
}


TEST(Lattice, TooManyCellsIsAnInputError)
{
  // 4096^3 = 2^36 passes the per-entry pattern but exceeds the 2^31 cap.
  const std::string message =
    input_error_message([] { parse("set cells = 4096, 4096, 4096"); });
  EXPECT_NE(message.find("lattice/cells"), std::string::npos) << message;
  EXPECT_NE(message.find("2^31"), std::string::npos) << message;
  // Exactly 2^31 cells is still allowed (constructing allocates nothing).
  EXPECT_NO_THROW(Lattice({4096, 4096, 128}));
}


TEST(Lattice, ConstructorChecksTheSameRanges)
{
  const std::string zero = input_error_message([] { Lattice({3, 0}); });
  EXPECT_NE(zero.find("lattice/cells"), std::string::npos) << zero;
  EXPECT_NE(zero.find("[1, 4096]"), std::string::npos) << zero;
  EXPECT_THROW(Lattice({4097}), InputError);
  EXPECT_THROW(Lattice(std::vector<unsigned int>{}), InputError);
  EXPECT_THROW(Lattice({1, 1, 1, 1}), InputError);
}
