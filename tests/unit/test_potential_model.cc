// Unit tests of the single-site laws, the cell-values file reader and
// PotentialModel: exact moments, sampling statistics, reproducibility,
// parameter validation.
#include <alloyspec/errors.h>
#include <alloyspec/lattice.h>
#include <alloyspec/potential_model.h>
#include <alloyspec/random_stream.h>

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
#include <sstream>
#include <string>
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
  EXPECT_ANY_THROW(parse("set law = gaussian"));
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
