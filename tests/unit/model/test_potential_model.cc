// Unit tests of the single-site laws (and the special functions behind their
// quantiles), the cell-values and density file readers and PotentialModel:
// exact moments, sampling statistics, reproducibility, parameter validation.
#include <alloyspec/core/errors.h>
#include <alloyspec/model/lattice.h>
#include <alloyspec/model/potential_model.h>
#include <alloyspec/model/random_stream.h>

#include <deal.II/base/parameter_handler.h>

#include <gtest/gtest.h>

#include <algorithm>
#include <cmath>
#include <cstdlib>
#include <filesystem>
#include <fstream>
#include <functional>
#include <iostream>
#include <iomanip>
#include <limits>
#include <sstream>
#include <string>
#include <tuple>
#include <vector>

namespace
{
  using alloyspec::InputError;
  using alloyspec::Lattice;
  using alloyspec::PotentialModel;
  using alloyspec::SingleSiteLaw;

  /** 500 x 400 = 200 000 cells: one realisation gives 2e5 independent samples. */
  const std::vector<unsigned int> sampling_cells = {500, 400};
  /**
   * Sample mean and variance are asymptotically normal (central limit
   * theorem) with standard errors sigma/sqrt(n) and sqrt((mu4 - sigma^4)/n).
   * Allowing 4 standard errors is common practice for a deterministic
   * statistical test (no single source); a correct sampler fails with
   * probability ~6e-5 per check.
   */
  constexpr double allowed_standard_errors = 4.0;
  /** Exact moments are sums of a few products: only rounding differs. */
  constexpr double exact_moment_tolerance = 1e-13;

  /** Exact first, second (central) and fourth central moments of a law. */
  struct Moments
  {
    double mean, variance, mu4;
  };

  /** Discrete moments computed directly from the defining sums. */
  Moments discrete_moments(const std::vector<double> &v, const std::vector<double> &p)
  {
    Moments m{0, 0, 0};
    for (std::size_t i = 0; i < v.size(); ++i)
      m.mean += p[i] * v[i];
    for (std::size_t i = 0; i < v.size(); ++i)
      {
        const double d = v[i] - m.mean;
        m.variance += p[i] * d * d;
        m.mu4 += p[i] * d * d * d * d;
      }
    return m;
  }

  /**
   * Checks the law's exact moments against @p exact, then the sample mean and
   * unbiased sample variance of one realisation over sampling_cells.
   */
  void check_moments(std::unique_ptr<SingleSiteLaw> law, const Moments &exact,
                     const std::uint64_t seed)
  {
    EXPECT_NEAR(law->mean(), exact.mean, exact_moment_tolerance * (1 + std::abs(exact.mean)));
    EXPECT_NEAR(law->variance(), exact.variance, exact_moment_tolerance * (1 + exact.variance));

    const Lattice  lattice(sampling_cells);
    PotentialModel model;
    model.set_law(std::move(law), lattice);
    const std::vector<double> q = model.cell_values(seed, 0);
    const double              n = static_cast<double>(q.size());
    double                    mean = 0;
    for (const double x : q)
      mean += x;
    mean /= n;
    double variance = 0;
    for (const double x : q)
      variance += (x - mean) * (x - mean);
    variance /= n - 1;

    const double se_mean     = std::sqrt(exact.variance / n);
    const double se_variance = std::sqrt((exact.mu4 - exact.variance * exact.variance) / n);
    EXPECT_NEAR(mean, exact.mean, allowed_standard_errors * se_mean)
      << model.description() << ": " << (mean - exact.mean) / se_mean << " standard errors";
    EXPECT_NEAR(variance, exact.variance, allowed_standard_errors * se_variance)
      << model.description() << ": " << (variance - exact.variance) / se_variance
      << " standard errors";
    std::cout << model.description() << ": mean off by " << (mean - exact.mean) / se_mean
              << ", variance off by " << (variance - exact.variance) / se_variance
              << " standard errors" << std::endl;
    for (const double x : q)
      {
        ASSERT_GE(x, model.bottom());
        ASSERT_LE(x, model.top());
      }
  }

  /** The InputError message of @p f, or "" if it throws none. */
  std::string input_error_message(const std::function<void()> &f)
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

#define EXPECT_CONTAINS(text, part) \
  EXPECT_NE(std::string(text).find(part), std::string::npos) << "message: " << (text)

  /** Declares, fills from @p body and parses subsection "potential". */
  PotentialModel parse(const std::string &body, const Lattice &lattice = Lattice({4, 4}))
  {
    dealii::ParameterHandler prm;
    PotentialModel::declare_parameters(prm);
    prm.parse_input_from_string("subsection potential\n" + body + "\nend\n");
    PotentialModel model;
    model.parse_parameters(prm, lattice);
    return model;
  }
} // namespace


// ----------------------------------------------------------------- laws

TEST(SingleSiteLaw, UniformQuantileAndExactMoments)
{
  const auto law = alloyspec::make_uniform_law(-1.0, 3.0);
  EXPECT_DOUBLE_EQ(law->quantile(0.25), 0.0);
  EXPECT_DOUBLE_EQ(law->quantile(0.5), 1.0);
  EXPECT_DOUBLE_EQ(law->support_min(), -1.0);
  EXPECT_DOUBLE_EQ(law->support_max(), 3.0);
  EXPECT_DOUBLE_EQ(law->mean(), 1.0);
  EXPECT_DOUBLE_EQ(law->variance(), 16.0 / 12.0);
}


TEST(SingleSiteLaw, BernoulliIsMonotoneInversion)
{
  // c = 0.2 of A = 1.5 over B = 0: F(0) = 0.8, so u <= 0.8 gives B.
  const auto law = alloyspec::make_bernoulli_law(0.2, 1.5, 0.0);
  EXPECT_EQ(law->quantile(0.1), 0.0);
  EXPECT_EQ(law->quantile(0.8), 0.0);
  EXPECT_EQ(law->quantile(0.8000001), 1.5);
  EXPECT_EQ(law->support_min(), 0.0);
  EXPECT_EQ(law->support_max(), 1.5);
  EXPECT_NE(law->description().find("bernoulli"), std::string::npos);
}


TEST(SingleSiteLaw, DegenerateBernoulliHasOnePointSupport)
{
  const auto all_b = alloyspec::make_bernoulli_law(0.0, 2.0, -1.0);
  EXPECT_EQ(all_b->support_min(), -1.0);
  EXPECT_EQ(all_b->support_max(), -1.0);
  EXPECT_EQ(all_b->quantile(1.0 - 1e-16), -1.0);
  EXPECT_EQ(all_b->variance(), 0.0);
  const auto all_a = alloyspec::make_bernoulli_law(1.0, 2.0, -1.0);
  EXPECT_EQ(all_a->support_min(), 2.0);
  EXPECT_EQ(all_a->quantile(1e-16), 2.0);
}


TEST(SingleSiteLaw, DiscreteSortsValuesAndSkipsZeroProbability)
{
  const auto law = alloyspec::make_discrete_law({5.0, 1.0, 3.0}, {0.5, 0.0, 0.5});
  EXPECT_EQ(law->quantile(1e-12), 3.0);
  EXPECT_EQ(law->quantile(0.5), 3.0);
  EXPECT_EQ(law->quantile(0.5 + 1e-12), 5.0);
  EXPECT_EQ(law->quantile(1.0 - 1e-16), 5.0);
  EXPECT_EQ(law->support_min(), 3.0) << "a value of probability 0 is not in the support";
  EXPECT_EQ(law->support_max(), 5.0);
}


TEST(SingleSiteLaw, DiscreteRenormalisesWithinTolerance)
{
  // Nine-decimal thirds sum to 0.999999999: accepted and renormalised.
  const auto law = alloyspec::make_discrete_law({0, 1, 2}, {0.333333333, 0.333333333, 0.333333333});
  EXPECT_NEAR(law->mean(), 1.0, exact_moment_tolerance);
  EXPECT_NEAR(law->variance(), 2.0 / 3.0, exact_moment_tolerance);
}


TEST(SingleSiteLaw, InvalidArgumentsNameTheParameter)
{
  const std::string uniform = input_error_message([] { alloyspec::make_uniform_law(2, 2); });
  EXPECT_CONTAINS(uniform, "potential/maximum");
  EXPECT_CONTAINS(uniform, "potential/minimum");

  EXPECT_CONTAINS(input_error_message([] { alloyspec::make_bernoulli_law(1.5, 1, 0); }),
                  "potential/concentration");
  EXPECT_CONTAINS(input_error_message([] { alloyspec::make_discrete_law({0, 1}, {0.5, 0.4}); }),
                  "potential/probabilities");
  EXPECT_CONTAINS(input_error_message([] { alloyspec::make_discrete_law({0, 1}, {1.5, -0.5}); }),
                  ">= 0");
  EXPECT_CONTAINS(input_error_message([] { alloyspec::make_discrete_law({0, 1}, {1.0}); }),
                  "equal length");
  EXPECT_CONTAINS(input_error_message([] { alloyspec::make_discrete_law({}, {}); }),
                  "potential/values");
  EXPECT_CONTAINS(input_error_message([] {
                    alloyspec::make_discrete_law(std::vector<double>(65, 0.0),
                                                 std::vector<double>(65, 1.0 / 65));
                  }),
                  "1 to 64");
  EXPECT_CONTAINS(input_error_message([] { alloyspec::make_uniform_law(0, INFINITY); }),
                  "finite");
}


// ------------------------------------------------------- sampling statistics

TEST(PotentialSampling, UniformMomentsMatch)
{
  const double a = -1.0, b = 3.0, w = b - a;
  check_moments(alloyspec::make_uniform_law(a, b), {0.5 * (a + b), w * w / 12, std::pow(w, 4) / 80},
                11);
}


TEST(PotentialSampling, BernoulliMomentsAndFrequencyMatch)
{
  const double c = 0.2, qa = 1.5, qb = 0.0, d = qa - qb;
  // Central values (1 - c) d with prob. c and -c d with prob. 1 - c.
  const Moments exact{c * qa + (1 - c) * qb, c * (1 - c) * d * d,
                      c * (1 - c) * std::pow(d, 4) * (std::pow(1 - c, 3) + std::pow(c, 3))};
  check_moments(alloyspec::make_bernoulli_law(c, qa, qb), exact, 12);

  const Lattice  lattice(sampling_cells);
  PotentialModel model;
  model.set_law(alloyspec::make_bernoulli_law(c, qa, qb), lattice);
  const std::vector<double> q = model.cell_values(12, 1);
  const double n         = static_cast<double>(q.size());
  const double frequency = std::count(q.begin(), q.end(), qa) / n;
  EXPECT_EQ(std::count(q.begin(), q.end(), qa) + std::count(q.begin(), q.end(), qb),
            static_cast<long>(q.size()));
  EXPECT_NEAR(frequency, c, allowed_standard_errors * std::sqrt(c * (1 - c) / n));
}


TEST(PotentialSampling, DiscreteMomentsAndFrequenciesMatch)
{
  const std::vector<double> v = {0.0, 1.0, 2.5, -0.5};
  const std::vector<double> p = {0.1, 0.4, 0.3, 0.2};
  check_moments(alloyspec::make_discrete_law(v, p), discrete_moments(v, p), 13);

  const Lattice  lattice(sampling_cells);
  PotentialModel model;
  model.set_law(alloyspec::make_discrete_law(v, p), lattice);
  const std::vector<double> q = model.cell_values(13, 1);
  const double              n = static_cast<double>(q.size());
  for (std::size_t i = 0; i < v.size(); ++i)
    EXPECT_NEAR(std::count(q.begin(), q.end(), v[i]) / n, p[i],
                allowed_standard_errors * std::sqrt(p[i] * (1 - p[i]) / n))
      << "value " << v[i];
}


// ------------------------------------------------------------ reproducibility

TEST(PotentialModel, CellValuesAreTheQuantilesOfTheStream)
{
  const Lattice  lattice({5, 3, 2});
  PotentialModel model;
  model.set_law(alloyspec::make_uniform_law(0, 2), lattice);
  const std::vector<double> q = model.cell_values(77, 4);
  ASSERT_EQ(q.size(), lattice.n_cells());
  for (std::size_t n = 0; n < q.size(); ++n)
    EXPECT_EQ(q[n], model.law()->quantile(alloyspec::uniform_open01(77, 4, n)));
}


TEST(PotentialModel, ValuesOfListedCellsAreThoseOfTheWholeBox)
{
  // A rank of a distributed mesh draws only its cells: the same numbers as
  // the whole draw at those indices, plain, tilted, and with a tilt window
  // (whose component is drawn once per realisation, not per rank).
  const Lattice                  lattice({6, 5, 4});
  const std::vector<std::size_t> cells{0, 3, 17, 58, 59, 119};
  PotentialModel                 model;
  model.set_law(alloyspec::make_bernoulli_law(0.3, 1.0, 0.0), lattice);
  const auto check = [&](const std::string &what) {
    for (const std::uint64_t r : {0u, 1u, 7u})
      {
        const std::vector<double> whole = model.cell_values(21, r);
        const std::vector<double> some  = model.cell_values(21, r, cells);
        ASSERT_EQ(some.size(), cells.size()) << what;
        for (std::size_t i = 0; i < cells.size(); ++i)
          EXPECT_EQ(some[i], whole[cells[i]]) << what << ", realisation " << r << ", cell " << cells[i];
      }
  };
  check("plain");
  model.set_tilt(1.5);
  check("tilted");
  model.set_tilt_window(3, 0.2);
  check("tilt window");
  PotentialModel fixed;
  std::vector<double> values(lattice.n_cells());
  for (std::size_t n = 0; n < values.size(); ++n)
    values[n] = 0.25 * double(n);
  fixed.set_fixed_values(values, lattice);
  const std::vector<double> some = fixed.cell_values(1, 0, cells);
  for (std::size_t i = 0; i < cells.size(); ++i)
    EXPECT_EQ(some[i], values[cells[i]]);
}


TEST(PotentialModel, SameKeySameValuesOtherwiseDifferent)
{
  const Lattice  lattice({32, 32});
  PotentialModel model;
  model.set_law(alloyspec::make_uniform_law(0, 1), lattice);
  const std::vector<double> a = model.cell_values(5, 0);
  EXPECT_EQ(a, model.cell_values(5, 0));

  const auto n_equal = [&](const std::vector<double> &b) {
    std::size_t equal = 0;
    for (std::size_t i = 0; i < a.size(); ++i)
      equal += (a[i] == b[i]);
    return equal;
  };
  // Continuous law: independent realisations coincide nowhere.
  EXPECT_EQ(n_equal(model.cell_values(5, 1)), 0u);
  EXPECT_EQ(n_equal(model.cell_values(6, 0)), 0u);
}


// --------------------------------------------------------------- parameters

TEST(PotentialModel, ParsesEachRandomLaw)
{
  const PotentialModel uniform = parse("");
  ASSERT_TRUE(uniform.is_random());
  EXPECT_EQ(uniform.bottom(), 0.0);
  EXPECT_EQ(uniform.top(), 1.0);

  const PotentialModel bernoulli =
    parse("set law = bernoulli\nset concentration = 0.3\nset value A = 2\nset value B = -1");
  EXPECT_EQ(bernoulli.bottom(), -1.0);
  EXPECT_EQ(bernoulli.top(), 2.0);
  EXPECT_NEAR(bernoulli.law()->mean(), 0.3 * 2 - 0.7, exact_moment_tolerance);

  const PotentialModel discrete =
    parse("set law = discrete\nset values = 1, 4, 2\nset probabilities = 0.25, 0.25, 0.5");
  EXPECT_EQ(discrete.bottom(), 1.0);
  EXPECT_EQ(discrete.top(), 4.0);
  EXPECT_NEAR(discrete.law()->mean(), 2.25, exact_moment_tolerance);
}


TEST(PotentialModel, InvalidParametersAreInputErrors)
{
  EXPECT_CONTAINS(input_error_message([] { parse("set minimum = 2\nset maximum = 1"); }),
                  "potential/maximum");
  EXPECT_CONTAINS(input_error_message([] {
                    parse("set law = discrete\nset values = 0, 1\nset probabilities = 0.5");
                  }),
                  "potential/probabilities");
  EXPECT_CONTAINS(input_error_message([] {
                    parse("set law = discrete\nset probabilities = 0.7, 0.7");
                  }),
                  "sum");
  EXPECT_CONTAINS(input_error_message([] { parse("set law = file"); }), "potential/file");
  // Out-of-pattern values are stopped by ParameterHandler itself.
  EXPECT_ANY_THROW(parse("set concentration = 1.5"));
  EXPECT_ANY_THROW(parse("set law = cauchy"));
  // Parameters of laws not selected are not checked.
  EXPECT_NO_THROW(parse("set law = bernoulli\nset minimum = 2\nset maximum = 1"));
}


// ------------------------------------------------------------ cell-values file

class CellValuesFile : public ::testing::Test
{
protected:
  void SetUp() override
  {
    std::string pattern = (std::filesystem::temp_directory_path() / "alloyspec-test-XXXXXX").string();
    ASSERT_NE(mkdtemp(pattern.data()), nullptr);
    directory_ = pattern;
  }
  void TearDown() override
  {
    std::error_code ignored;
    std::filesystem::remove_all(directory_, ignored);
  }
  /** Writes @p lines to a new file and returns its path. */
  std::string write(const std::string &name, const std::vector<std::string> &lines) const
  {
    const std::string path = (directory_ / name).string();
    std::ofstream     out(path);
    for (const std::string &line : lines)
      out << line << '\n';
    return path;
  }
  /** The InputError message from reading @p lines on a 3 x 2 lattice. */
  std::string error_for(const std::vector<std::string> &lines) const
  {
    const std::string path = write("bad.txt", lines);
    return input_error_message([&] { alloyspec::read_cell_values(path, Lattice({3, 2})); });
  }
  std::filesystem::path directory_;
};


TEST_F(CellValuesFile, RoundTripInOneTwoAndThreeDimensions)
{
  for (const std::vector<unsigned int> &cells :
       {std::vector<unsigned int>{7}, std::vector<unsigned int>{4, 3},
        std::vector<unsigned int>{3, 2, 4}})
    {
      const Lattice       lattice(cells);
      std::vector<double> values(lattice.n_cells());
      for (std::size_t n = 0; n < values.size(); ++n)
        values[n] = 10 * alloyspec::uniform_open01(3, 0, n) - 5;

      // Reverse order, comments, blank lines and odd spacing are all allowed.
      std::vector<std::string> lines = {"# cell values", ""};
      for (std::size_t n = values.size(); n-- > 0;)
        {
          std::ostringstream line;
          line << std::setprecision(17) << "  ";
          const auto c = lattice.cell_coordinates(n);
          for (unsigned int d = 0; d < lattice.dimension(); ++d)
            line << c[d] << (d % 2 ? "\t" : " ");
          line << values[n] << (n % 3 == 0 ? "   # note" : "");
          lines.push_back(line.str());
          if (n % 5 == 0)
            lines.push_back("   ");
        }
      const std::string path = write("values.txt", lines);
      EXPECT_EQ(alloyspec::read_cell_values(path, lattice), values)
        << lattice.dimension() << "D";

      PotentialModel model = parse("set law = file\nset file = " + path, lattice);
      EXPECT_FALSE(model.is_random());
      EXPECT_EQ(model.cell_values(1, 0), values);
      EXPECT_EQ(model.cell_values(2, 9), values) << "a file potential is the same every time";
      EXPECT_EQ(model.bottom(), *std::min_element(values.begin(), values.end()));
      EXPECT_EQ(model.top(), *std::max_element(values.begin(), values.end()));
    }
}


TEST_F(CellValuesFile, EachErrorNamesFileAndLine)
{
  // Valid body for a 3 x 2 lattice; each case replaces or adds one line.
  const std::vector<std::string> good = {"0 0 1", "1 0 2", "2 0 3", "0 1 4", "1 1 5", "2 1 6"};
  const auto with = [&](const std::size_t index, const std::string &line) {
    std::vector<std::string> lines = good;
    lines[index]                   = line;
    return lines;
  };

  const std::string malformed = error_for(with(2, "2 x 3"));
  EXPECT_CONTAINS(malformed, "line 3");
  EXPECT_CONTAINS(malformed, "bad.txt");
  EXPECT_CONTAINS(malformed, "not an integer");

  EXPECT_CONTAINS(error_for(with(1, "1 0 two")), "line 2");
  EXPECT_CONTAINS(error_for(with(1, "1.5 0 2")), "line 2");

  const std::string fields = error_for(with(3, "0 4"));
  EXPECT_CONTAINS(fields, "line 4");
  EXPECT_CONTAINS(fields, "expected 3 fields");

  const std::string range = error_for(with(4, "1 2 5"));
  EXPECT_CONTAINS(range, "line 5");
  EXPECT_CONTAINS(range, "[0, 1]");
  EXPECT_CONTAINS(error_for(with(4, "-1 1 5")), "line 5");

  const std::string duplicate = error_for(with(5, "1 0 6 # again"));
  EXPECT_CONTAINS(duplicate, "line 6");
  EXPECT_CONTAINS(duplicate, "first on line 2");

  for (const char *bad : {"nan", "inf", "-inf", "1e999"})
    EXPECT_CONTAINS(error_for(with(0, std::string("0 0 ") + bad)), "line 1");

  std::vector<std::string> missing = {"# two cells left out", "0 0 1", "2 0 3", "0 1 4", "1 1 5"};
  const std::string        absent  = error_for(missing);
  EXPECT_CONTAINS(absent, "2 of 6 cells are missing");
  EXPECT_CONTAINS(absent, "(1, 0)");

  const std::string path       = (directory_ / "does-not-exist.txt").string();
  const std::string unreadable = input_error_message(
    [&] { alloyspec::read_cell_values(path, Lattice({3, 2})); });
  EXPECT_CONTAINS(unreadable, "does-not-exist.txt");
  EXPECT_CONTAINS(unreadable, "cannot open");
}


// ======================================================================
// Laws with continuous, unbounded, tabulated and binomial single-site laws
// ======================================================================

namespace
{
  constexpr double pi       = 3.141592653589793238462643383279502884;
  constexpr double infinity = std::numeric_limits<double>::infinity();
  /**
   * Φ^{-1} and Φ are evaluated to rounding level; a few units in the last
   * place (2.2e-16 relative) of slack, ten times over.
   */
  constexpr double normal_quantile_tolerance = 4e-15;
  /** Round trip Φ(Φ^{-1}(u)) = u, absolute. */
  constexpr double normal_round_trip_tolerance = 1e-14;
  /** beta_quantile() iterates to a relative accuracy of about 1e-13 in x. */
  constexpr double beta_quantile_tolerance = 1e-12;
  /** I_x(a, b) from the continued fraction: rounding in a few dozen terms and in ln B. */
  constexpr double incomplete_beta_tolerance = 1e-14;
  /**
   * Moments by composite 3-point Gauss–Legendre quadrature of a smooth
   * density: the error falls like h^6 and is far below this.
   */
  constexpr double quadrature_tolerance = 1e-12;

  /**
   * ∫_a^b f by composite 3-point Gauss–Legendre on @p panels equal panels
   * (exact for polynomials of degree ≤ 5 on each panel).
   */
  template <class F>
  double gauss_legendre(const F &f, const double a, const double b, const unsigned int panels)
  {
    const double node = std::sqrt(0.6), w_mid = 8.0 / 9.0, w_side = 5.0 / 9.0;
    const double h    = (b - a) / panels;
    double       sum  = 0;
    for (unsigned int i = 0; i < panels; ++i)
      {
        const double c = a + (i + 0.5) * h, r = 0.5 * h;
        sum += r * (w_side * f(c - r * node) + w_mid * f(c) + w_side * f(c + r * node));
      }
    return sum;
  }

  /** Mean, variance and fourth central moment of the density @p g on [a, b] by quadrature. */
  template <class F>
  Moments moments_by_quadrature(const F &g, const double a, const double b,
                                const unsigned int panels)
  {
    Moments m{0, 0, 0};
    const double mass = gauss_legendre(g, a, b, panels);
    m.mean            = gauss_legendre([&](double x) { return x * g(x); }, a, b, panels) / mass;
    m.variance        = gauss_legendre([&](double x) { return std::pow(x - m.mean, 2) * g(x); },
                                a, b, panels) / mass;
    m.mu4             = gauss_legendre([&](double x) { return std::pow(x - m.mean, 4) * g(x); },
                           a, b, panels) / mass;
    return m;
  }

  /**
   * Exact moments of a + (b − a) X, X ~ Beta(α, β), from the raw moments
   * E[X^k] = ∏_{j<k} (α + j)/(α + β + j).
   */
  Moments beta_moments(const double alpha, const double beta, const double a, const double b)
  {
    double raw[5] = {1, 0, 0, 0, 0};
    for (int k = 1; k <= 4; ++k)
      raw[k] = raw[k - 1] * (alpha + k - 1) / (alpha + beta + k - 1);
    const double m = raw[1], w = b - a;
    const double var = raw[2] - m * m;
    const double mu4 = raw[4] - 4 * m * raw[3] + 6 * m * m * raw[2] - 3 * std::pow(m, 4);
    return {a + w * m, w * w * var, std::pow(w, 4) * mu4};
  }

  /** Binomial(n, p) probabilities from the exact products C(n, k) p^k (1−p)^{n−k}. */
  std::vector<double> binomial_probabilities(const unsigned int n, const double p)
  {
    std::vector<double> pmf(n + 1);
    for (unsigned int k = 0; k <= n; ++k)
      {
        double c = 1;
        for (unsigned int j = 1; j <= k; ++j)
          c = c * (n - k + j) / j;
        pmf[k] = c * std::pow(p, k) * std::pow(1 - p, n - k);
      }
    return pmf;
  }

  /** quantile() must be non-decreasing in u (inversion of a distribution function). */
  void expect_monotone(const SingleSiteLaw &law)
  {
    double previous = -infinity;
    for (int i = 1; i < 4000; ++i)
      {
        const double q = law.quantile(i / 4000.0);
        ASSERT_GE(q, previous) << law.description() << " at u = " << i / 4000.0;
        previous = q;
      }
  }
} // namespace


// ------------------------------------------------------- special functions

TEST(SpecialFunctions, NormalQuantileAtKnownPoints)
{
  // From memory; confirmed against a 40-digit evaluation of √2 erf^{-1}(2p − 1).
  const std::vector<std::pair<double, double>> known = {
    {0.975, 1.959963984540054},  {0.95, 1.6448536269514727}, {0.99, 2.3263478740408411},
    {0.999, 3.0902323061678135}, {1e-10, -6.3613409024040562}, {0.5, 0.0}};
  for (const auto &[p, x] : known)
    {
      EXPECT_NEAR(alloyspec::standard_normal_quantile(p), x,
                  normal_quantile_tolerance * (1 + std::abs(x)))
        << "p = " << p;
      // Mirror image: 1 − p is rounded by up to ε/2 = 1.1e-16, which moves
      // the quantile by up to that over the density φ(x).
      const double density = std::exp(-0.5 * x * x) / std::sqrt(2 * pi);
      EXPECT_NEAR(alloyspec::standard_normal_quantile(1.0 - p), -x,
                  normal_quantile_tolerance * (1 + std::abs(x)) +
                    0.5 * std::numeric_limits<double>::epsilon() / density)
        << "mirrored p = " << p;
    }
  EXPECT_EQ(alloyspec::standard_normal_quantile(0.0), -infinity);
  EXPECT_EQ(alloyspec::standard_normal_quantile(1.0), infinity);
  EXPECT_TRUE(std::isnan(alloyspec::standard_normal_quantile(1.5)));
}


TEST(SpecialFunctions, NormalQuantileRoundTrip)
{
  // A grid that covers both tails and the switch of Acklam's formula at 0.02425.
  for (int i = 1; i < 100000; ++i)
    {
      const double u = i / 100000.0;
      ASSERT_NEAR(alloyspec::standard_normal_cdf(alloyspec::standard_normal_quantile(u)), u,
                  normal_round_trip_tolerance)
        << "u = " << u;
    }
  // Far lower tail, relatively: Φ(x) changes by |x| dx/… so a last-bit error
  // in x shows as a relative error of about x² ε in Φ.
  for (int k = 1; k <= 300; ++k)
    {
      const double u = std::pow(10.0, -k);
      const double x = alloyspec::standard_normal_quantile(u);
      EXPECT_NEAR(alloyspec::standard_normal_cdf(x) / u, 1.0,
                  (1 + x * x) * std::numeric_limits<double>::epsilon() * 4)
        << "u = " << u;
    }
}


TEST(SpecialFunctions, IncompleteBetaClosedForms)
{
  for (const double x : {1e-8, 0.01, 0.2, 0.5, 0.73, 0.99, 1 - 1e-9})
    {
      // I_x(1, b) = 1 − (1−x)^b, I_x(a, 1) = x^a.
      EXPECT_NEAR(alloyspec::incomplete_beta_ratio(1.0, 3.5, x), -std::expm1(3.5 * std::log1p(-x)),
                  incomplete_beta_tolerance);
      EXPECT_NEAR(alloyspec::incomplete_beta_ratio(0.4, 1.0, x), std::pow(x, 0.4),
                  incomplete_beta_tolerance);
      // Integer shapes: I_x(2, 3) = Σ_{j=2}^{4} C(4, j) x^j (1−x)^{4−j}.
      const double y = 1 - x;
      EXPECT_NEAR(alloyspec::incomplete_beta_ratio(2.0, 3.0, x),
                  6 * x * x * y * y + 4 * x * x * x * y + x * x * x * x, incomplete_beta_tolerance);
    }
  EXPECT_EQ(alloyspec::incomplete_beta_ratio(2.0, 2.0, 0.0), 0.0);
  EXPECT_EQ(alloyspec::incomplete_beta_ratio(2.0, 2.0, 1.0), 1.0);
}


TEST(SpecialFunctions, BetaQuantileClosedForms)
{
  for (int i = 1; i < 1000; ++i)
    {
      const double u = i / 1000.0;
      // α = 1: x = 1 − (1−u)^{1/β}; β = 1: x = u^{1/α}.
      const double power_upper = -std::expm1(std::log1p(-u) / 3.0);
      const double power_lower = std::pow(u, 1.0 / 2.5);
      EXPECT_NEAR(alloyspec::beta_quantile(1.0, 3.0, u), power_upper,
                  beta_quantile_tolerance * power_upper);
      EXPECT_NEAR(alloyspec::beta_quantile(2.5, 1.0, u), power_lower,
                  beta_quantile_tolerance * power_lower);
      // Round trip through I_x for unequal, non-integer shapes.
      EXPECT_NEAR(alloyspec::incomplete_beta_ratio(0.3, 7.0, alloyspec::beta_quantile(0.3, 7.0, u)),
                  u, beta_quantile_tolerance);
    }
  // Deep lower tail, relatively: x = u^{1/α}.
  for (const double u : {1e-16, 1e-10, 1e-5})
    EXPECT_NEAR(alloyspec::beta_quantile(0.5, 1.0, u), u * u, beta_quantile_tolerance * u * u);
  // Symmetric shapes: the median is 1/2.
  for (const double s : {0.1, 0.7, 1.0, 4.0, 50.0, 1000.0})
    EXPECT_NEAR(alloyspec::beta_quantile(s, s, 0.5), 0.5, beta_quantile_tolerance) << s;
}


// ----------------------------------------------------------------- gaussian

TEST(GaussianLaw, UntruncatedIsUnbounded)
{
  const auto law = alloyspec::make_gaussian_law(1.5, 0.5);
  EXPECT_EQ(law->support_min(), -infinity);
  EXPECT_EQ(law->support_max(), infinity);
  EXPECT_EQ(law->mean(), 1.5);
  EXPECT_EQ(law->variance(), 0.25);
  EXPECT_NEAR(law->quantile(0.975), 1.5 + 0.5 * 1.959963984540054, normal_quantile_tolerance * 3);
  expect_monotone(*law);
}


TEST(GaussianLaw, TruncatedMomentsMatchClosedFormsAndQuadrature)
{
  // Half-normal: N(μ, σ²) cut at μ (the far end 40 σ away holds no mass in
  // double precision). Mean μ + σ√(2/π), variance σ²(1 − 2/π) (Johnson,
  // Kotz & Balakrishnan, vol. 1, ch. 13 §10.1).
  const double mu = 0.5, sigma = 2.0;
  const auto   half = alloyspec::make_truncated_gaussian_law(mu, sigma, mu, mu + 40 * sigma);
  EXPECT_NEAR(half->mean(), mu + sigma * std::sqrt(2 / pi), exact_moment_tolerance * 4);
  EXPECT_NEAR(half->variance(), sigma * sigma * (1 - 2 / pi), exact_moment_tolerance * 4);
  EXPECT_EQ(half->support_min(), mu);
  // Its median: Φ^{-1}(3/4) σ above μ.
  EXPECT_NEAR(half->quantile(0.5), mu + sigma * alloyspec::standard_normal_quantile(0.75),
              normal_quantile_tolerance * 10);

  // Symmetric cut: the mean stays μ.
  const auto symmetric = alloyspec::make_truncated_gaussian_law(mu, sigma, mu - 3, mu + 3);
  EXPECT_NEAR(symmetric->mean(), mu, exact_moment_tolerance * 4);
  EXPECT_NEAR(symmetric->quantile(0.5), mu, normal_quantile_tolerance * 10);

  // General and far-tail cuts (the latter takes the mirrored branch)
  // against quadrature of the truncated density.
  for (const auto &[a, b] : std::vector<std::pair<double, double>>{
         {-0.5, 6.0}, {-20.0, -1.0}, {mu + 3 * sigma, mu + 10 * sigma}})
    {
      const auto    law = alloyspec::make_truncated_gaussian_law(mu, sigma, a, b);
      const Moments m   = moments_by_quadrature(
        [&](double x) { return std::exp(-0.5 * std::pow((x - mu) / sigma, 2)); }, a, b, 4000);
      EXPECT_NEAR(law->mean(), m.mean, quadrature_tolerance * (1 + std::abs(m.mean)))
        << law->description();
      EXPECT_NEAR(law->variance(), m.variance, quadrature_tolerance * m.variance)
        << law->description();
      EXPECT_EQ(law->support_min(), a);
      EXPECT_EQ(law->support_max(), b);
      expect_monotone(*law);
      EXPECT_GE(law->quantile(1e-16), a);
      EXPECT_LE(law->quantile(1 - 1e-16), b);
    }
}


TEST(GaussianLaw, InvalidArgumentsNameTheParameter)
{
  const std::string sd = input_error_message([] { alloyspec::make_gaussian_law(0, 0); });
  EXPECT_CONTAINS(sd, "potential/standard deviation");
  EXPECT_CONTAINS(sd, "> 0");
  EXPECT_CONTAINS(input_error_message([] { alloyspec::make_gaussian_law(INFINITY, 1); }),
                  "potential/mean");
  EXPECT_CONTAINS(input_error_message(
                    [] { alloyspec::make_truncated_gaussian_law(0, 1, 1, 1); }),
                  "potential/maximum");
  const std::string far =
    input_error_message([] { alloyspec::make_truncated_gaussian_law(0, 1, 9, 12); });
  EXPECT_CONTAINS(far, "potential/minimum");
  EXPECT_CONTAINS(far, "[-8, 8]");
}


// --------------------------------------------------------------------- beta

TEST(BetaLaw, ScaledQuantileAndExactMoments)
{
  const auto law = alloyspec::make_beta_law(1.0, 3.0, -1.0, 2.0);
  const double u = 0.3;
  EXPECT_NEAR(law->quantile(u), -1.0 + 3.0 * (-std::expm1(std::log1p(-u) / 3.0)),
              beta_quantile_tolerance * 3);
  const Moments m = beta_moments(1.0, 3.0, -1.0, 2.0);
  EXPECT_NEAR(law->mean(), m.mean, exact_moment_tolerance);
  EXPECT_NEAR(law->variance(), m.variance, exact_moment_tolerance);
  EXPECT_EQ(law->support_min(), -1.0);
  EXPECT_EQ(law->support_max(), 2.0);
  expect_monotone(*law);
  expect_monotone(*alloyspec::make_beta_law(0.2, 0.3, 0, 1));

  EXPECT_CONTAINS(input_error_message([] { alloyspec::make_beta_law(0.05, 1, 0, 1); }),
                  "potential/shape at minimum");
  EXPECT_CONTAINS(input_error_message([] { alloyspec::make_beta_law(1, 2000, 0, 1); }),
                  "[0.1, 1000]");
  EXPECT_CONTAINS(input_error_message([] { alloyspec::make_beta_law(1, 1, 1, 0); }),
                  "potential/maximum");
}


// ---------------------------------------------------------------- tabulated

TEST(TabulatedLaw, TriangleAndUniformExactly)
{
  // Triangle on [0, 2] with peak at 1, given unnormalised (peak 7):
  // F^{-1}(u) = √(2u) for u ≤ 1/2, 2 − √(2(1−u)) above.
  const auto triangle = alloyspec::make_tabulated_law({0, 1, 2}, {0, 7, 0}, "test triangle");
  for (int i = 1; i < 100; ++i)
    {
      const double u = i / 100.0;
      const double x = u <= 0.5 ? std::sqrt(2 * u) : 2 - std::sqrt(2 * (1 - u));
      EXPECT_NEAR(triangle->quantile(u), x, exact_moment_tolerance) << u;
    }
  EXPECT_NEAR(triangle->mean(), 1.0, exact_moment_tolerance);
  EXPECT_NEAR(triangle->variance(), 1.0 / 6.0, exact_moment_tolerance);

  // Asymmetric triangle (a, c, b) = (-1, 0, 3): mean (a+b+c)/3, variance
  // (a²+b²+c²−ab−ac−bc)/18.
  const auto skew = alloyspec::make_tabulated_law({-1, 0, 3}, {0, 1, 0}, "test skew");
  EXPECT_NEAR(skew->mean(), 2.0 / 3.0, exact_moment_tolerance);
  EXPECT_NEAR(skew->variance(), (1 + 9 + 0 + 3 - 0 - 0) / 18.0, exact_moment_tolerance);
  // F(x) = (x+1)²/4 on [−1, 0].
  EXPECT_NEAR(skew->quantile(0.09), -1 + std::sqrt(4 * 0.09), exact_moment_tolerance);

  const auto uniform = alloyspec::make_tabulated_law({0, 4}, {3, 3}, "test uniform");
  EXPECT_NEAR(uniform->quantile(0.3), 1.2, exact_moment_tolerance);
  EXPECT_NEAR(uniform->variance(), 16.0 / 12.0, exact_moment_tolerance);
}


TEST(TabulatedLaw, SupportSkipsZeroEnds)
{
  // Invented density: zero on [−2, −1] and [2, 2.5], two bumps.
  const auto law = alloyspec::make_tabulated_law({-2, -1, 0, 1, 2, 2.5, 3, 3.5},
                                                 {0, 0, 2, 0.5, 0, 0, 1, 0}, "invented");
  EXPECT_EQ(law->support_min(), -1.0);
  EXPECT_EQ(law->support_max(), 3.5);
  expect_monotone(*law);
  for (int i = 1; i < 1000; ++i)
    {
      const double q = law->quantile(i / 1000.0);
      EXPECT_FALSE(q > 2.0 && q < 2.5) << "value in a zero-density gap: " << q;
    }
}


// ----------------------------------------------------------------- binomial

TEST(BinomialAlloy, HandComputedProbabilities)
{
  // n = 4, x = 1/4: P(K = k) = C(4, k) 3^{4−k} / 256 = 81, 108, 54, 12, 1 (/256).
  const auto law = alloyspec::make_binomial_alloy_law(4, 0.25, 2.0, 0.0);
  const double cumulative[] = {81, 189, 243, 255, 256};
  for (int k = 0; k < 5; ++k)
    {
      const double value = 0.5 * k; // q_B + (q_A − q_B) k/4
      EXPECT_EQ(law->quantile(cumulative[k] / 256.0 - 1e-12), value) << k;
      if (k < 4)
        {
          EXPECT_EQ(law->quantile(cumulative[k] / 256.0 + 1e-12), value + 0.5) << k;
        }
    }
  EXPECT_DOUBLE_EQ(law->mean(), 0.5);
  EXPECT_DOUBLE_EQ(law->variance(), 4.0 * 0.25 * 0.75 / 4);
  EXPECT_EQ(law->support_min(), 0.0);
  EXPECT_EQ(law->support_max(), 2.0);

  // q_A below q_B: still non-decreasing in u, and the same probabilities of
  // compositions: P(q = 2 − 0.5 k) = P(K = k).
  const auto reversed = alloyspec::make_binomial_alloy_law(4, 0.25, 0.0, 2.0);
  expect_monotone(*reversed);
  EXPECT_EQ(reversed->quantile(1.0 / 256 - 1e-12), 0.0);
  EXPECT_EQ(reversed->quantile(1.0 / 256 + 1e-12), 0.5);
  EXPECT_EQ(reversed->quantile(1 - 81.0 / 256 + 1e-12), 2.0);
  EXPECT_DOUBLE_EQ(reversed->mean(), 1.5);

  // One atom per cell is the Bernoulli law.
  const auto one       = alloyspec::make_binomial_alloy_law(1, 0.2, 1.5, 0.0);
  const auto bernoulli = alloyspec::make_bernoulli_law(0.2, 1.5, 0.0);
  for (int i = 1; i < 1000; ++i)
    EXPECT_EQ(one->quantile(i / 1000.0), bernoulli->quantile(i / 1000.0));

  // Pure crystals.
  EXPECT_EQ(alloyspec::make_binomial_alloy_law(10, 0.0, 3, 1)->quantile(0.999), 1.0);
  EXPECT_EQ(alloyspec::make_binomial_alloy_law(10, 1.0, 3, 1)->quantile(0.001), 3.0);
  EXPECT_EQ(alloyspec::make_binomial_alloy_law(10, 1.0, 3, 1)->support_min(), 3.0);

  // Many atoms: the table survives underflow far from the mode.
  const auto large = alloyspec::make_binomial_alloy_law(alloyspec::max_atoms_per_cell, 0.5, 1, 0);
  EXPECT_NEAR(large->quantile(0.5), 0.5, 1e-6);
  expect_monotone(*large);

  EXPECT_CONTAINS(input_error_message([] { alloyspec::make_binomial_alloy_law(0, 0.5, 1, 0); }),
                  "potential/atoms per cell");
  EXPECT_CONTAINS(input_error_message([] { alloyspec::make_binomial_alloy_law(3, -0.1, 1, 0); }),
                  "potential/concentration");
}


// ------------------------------------------------------- sampling statistics

TEST(PotentialSampling, GaussianMomentsMatch)
{
  const double mu = -0.3, sigma = 0.7;
  check_moments(alloyspec::make_gaussian_law(mu, sigma),
                {mu, sigma * sigma, 3 * std::pow(sigma, 4)}, 21);
}


TEST(PotentialSampling, TruncatedGaussianMomentsMatch)
{
  // Fourth central moments by quadrature of the truncated density.
  const double mu = 1.0, sigma = 2.0;
  for (const auto &[a, b, seed] : std::vector<std::tuple<double, double, int>>{
         {-0.5, 6.0, 22}, {mu + 3 * sigma, mu + 10 * sigma, 23}})
    {
      const Moments m = moments_by_quadrature(
        [&](double x) { return std::exp(-0.5 * std::pow((x - mu) / sigma, 2)); }, a, b, 4000);
      check_moments(alloyspec::make_truncated_gaussian_law(mu, sigma, a, b), m, seed);
    }
}


TEST(PotentialSampling, BetaMomentsMatch)
{
  // Fourth central moments exact, from the raw moments.
  check_moments(alloyspec::make_beta_law(0.5, 2.5, -1.0, 2.0), beta_moments(0.5, 2.5, -1.0, 2.0),
                24);
  check_moments(alloyspec::make_beta_law(3.0, 0.7, 0.0, 1.0), beta_moments(3.0, 0.7, 0.0, 1.0),
                25);
}


TEST(PotentialSampling, TabulatedMomentsMatch)
{
  // Invented density; moments exact: 3-point Gauss–Legendre on each linear
  // piece integrates (x − m)^4 h(x), of degree 5, exactly.
  const std::vector<double> q = {-2, -1, 0, 1, 2, 2.5, 3, 3.5};
  const std::vector<double> h = {0, 0, 2, 0.5, 0, 0, 1, 0};
  const auto density = [&](const double x) {
    for (std::size_t i = 0; i + 1 < q.size(); ++i)
      if (x >= q[i] && x <= q[i + 1])
        return h[i] + (h[i + 1] - h[i]) * (x - q[i]) / (q[i + 1] - q[i]);
    return 0.0;
  };
  Moments m{0, 0, 0};
  for (const auto &[k, target] : std::vector<std::pair<int, double *>>{
         {1, &m.mean}, {2, &m.variance}, {4, &m.mu4}})
    {
      double mass = 0, sum = 0;
      for (std::size_t i = 0; i + 1 < q.size(); ++i)
        {
          mass += gauss_legendre(density, q[i], q[i + 1], 1);
          sum += gauss_legendre(
            [&](double x) { return std::pow(x - (k == 1 ? 0.0 : m.mean), k) * density(x); }, q[i],
            q[i + 1], 1);
        }
      *target = sum / mass;
    }
  check_moments(alloyspec::make_tabulated_law(q, h, "invented"), m, 26);
}


TEST(PotentialSampling, BinomialAlloyMomentsAndFrequenciesMatch)
{
  // Exact moments by enumerating the binomial probabilities.
  for (const auto &[n, x, qa, qb, seed] :
       std::vector<std::tuple<unsigned int, double, double, double, int>>{
         {20, 0.3, 1.5, -0.5, 27}, {7, 0.6, -1.0, 2.0, 28}})
    {
      const std::vector<double> pmf = binomial_probabilities(n, x);
      std::vector<double>       values;
      for (unsigned int k = 0; k <= n; ++k)
        values.push_back(qb + (qa - qb) * k / double(n));
      check_moments(alloyspec::make_binomial_alloy_law(n, x, qa, qb),
                    discrete_moments(values, pmf), seed);

      // Frequency of each composition in one realisation.
      const Lattice  lattice(sampling_cells);
      PotentialModel model;
      model.set_law(alloyspec::make_binomial_alloy_law(n, x, qa, qb), lattice);
      const std::vector<double> sample = model.cell_values(seed, 1);
      const double              total  = static_cast<double>(sample.size());
      for (unsigned int k = 0; k <= n; ++k)
        {
          const double count = std::count_if(sample.begin(), sample.end(), [&](double v) {
            return std::abs(v - values[k]) < 1e-12;
          });
          EXPECT_NEAR(count / total, pmf[k],
                      allowed_standard_errors * std::sqrt(pmf[k] * (1 - pmf[k]) / total) + 1e-12)
            << "n = " << n << ", k = " << k;
        }
    }
}


// --------------------------------------------------------------- parameters

TEST(PotentialModel, ParsesTheNewLaws)
{
  const PotentialModel gaussian = parse("set law = gaussian\nset mean = 1\nset standard deviation = 0.5");
  EXPECT_EQ(gaussian.bottom(), -infinity);
  EXPECT_EQ(gaussian.top(), infinity);
  EXPECT_EQ(gaussian.law()->variance(), 0.25);

  const PotentialModel truncated = parse(
    "set law = gaussian\nset mean = 1\nset standard deviation = 0.5\nset truncate = true\n"
    "set minimum = 0\nset maximum = 1.5");
  EXPECT_EQ(truncated.bottom(), 0.0);
  EXPECT_EQ(truncated.top(), 1.5);

  const PotentialModel beta = parse("set law = beta\nset shape at minimum = 1\n"
                                    "set shape at maximum = 3\nset minimum = 2\nset maximum = 5");
  EXPECT_EQ(beta.bottom(), 2.0);
  EXPECT_NEAR(beta.law()->mean(), 2.0 + 3.0 / 4.0, exact_moment_tolerance);

  const PotentialModel binomial = parse("set law = binomial\nset atoms per cell = 8\n"
                                        "set concentration = 0.5\nset value A = 1\nset value B = 0");
  EXPECT_NEAR(binomial.law()->variance(), 0.25 / 8, exact_moment_tolerance);

  EXPECT_CONTAINS(input_error_message([] {
                    parse("set law = gaussian\nset standard deviation = 0");
                  }),
                  "potential/standard deviation");
  EXPECT_CONTAINS(input_error_message([] {
                    parse("set law = gaussian\nset truncate = true\nset minimum = 20\n"
                          "set maximum = 30");
                  }),
                  "potential/minimum");
  EXPECT_CONTAINS(input_error_message([] { parse("set law = tabulated"); }),
                  "potential/density file");
  // Out-of-pattern values are stopped by ParameterHandler itself.
  EXPECT_ANY_THROW(parse("set law = beta\nset shape at minimum = 0.01"));
  EXPECT_ANY_THROW(parse("set law = binomial\nset atoms per cell = 0"));
  EXPECT_ANY_THROW(parse("set truncate = maybe"));
}


using DensityFile = CellValuesFile;

TEST_F(DensityFile, ReadsAndNormalises)
{
  // Invented: the triangle on [0, 2] with unnormalised peak 5.
  const std::string path = write("triangle.txt", {"# q  h(q)", "0 0", "", "1 5   # peak", "2 0"});
  const PotentialModel model = parse("set law = tabulated\nset density file = " + path);
  ASSERT_TRUE(model.is_random());
  EXPECT_NEAR(model.law()->quantile(0.125), 0.5, exact_moment_tolerance);
  EXPECT_NEAR(model.law()->variance(), 1.0 / 6.0, exact_moment_tolerance);
  EXPECT_CONTAINS(model.description(), "triangle.txt");
}


TEST_F(DensityFile, EachErrorNamesFileAndLine)
{
  const auto error_of = [&](const std::vector<std::string> &lines) {
    const std::string path = write("density.txt", lines);
    return input_error_message([&] { alloyspec::read_tabulated_law(path); });
  };
  const std::string negative = error_of({"0 1", "1 -2", "2 0"});
  EXPECT_CONTAINS(negative, "density.txt");
  EXPECT_CONTAINS(negative, "line 2");
  EXPECT_CONTAINS(negative, "negative");

  const std::string order = error_of({"0 1", "# comment", "1 1", "1 2"});
  EXPECT_CONTAINS(order, "line 4");
  EXPECT_CONTAINS(order, "increase strictly");
  EXPECT_CONTAINS(error_of({"0 1", "-1 1"}), "line 2");

  for (const char *bad : {"nan", "inf", "1e999"})
    {
      EXPECT_CONTAINS(error_of({"0 1", std::string("1 ") + bad}), "line 2");
    }
  EXPECT_CONTAINS(error_of({std::string("nan 1"), "1 1"}), "line 1");
  EXPECT_CONTAINS(error_of({"0 1", "1 x"}), "not a number");
  EXPECT_CONTAINS(error_of({"0 1 2"}), "expected 2 fields");

  const std::string few = error_of({"# only one point", "0 1"});
  EXPECT_CONTAINS(few, "density.txt");
  EXPECT_CONTAINS(few, "at least 2");
  const std::string zero = error_of({"0 0", "1 0", "2 0"});
  EXPECT_CONTAINS(zero, "density.txt");
  EXPECT_CONTAINS(zero, "integral");

  EXPECT_CONTAINS(input_error_message([&] {
                    alloyspec::read_tabulated_law((directory_ / "missing.txt").string());
                  }),
                  "cannot open");
}
