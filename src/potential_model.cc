/** @file potential_model.cc  Single-site laws, the cell-values file, the random cell potential. */
#include <alloyspec/errors.h>
#include <alloyspec/lattice.h>
#include <alloyspec/potential_model.h>
#include <alloyspec/random_stream.h>

#include <deal.II/base/parameter_handler.h>
#include <deal.II/base/utilities.h>

#include <algorithm>
#include <cerrno>
#include <cmath>
#include <cstdlib>
#include <fstream>
#include <numeric>
#include <sstream>
#include <stdexcept>
#include <utility>

namespace alloyspec
{
  namespace
  {
    constexpr unsigned int max_discrete_values = 64;
    /**
     * Tolerance on the sum of the probabilities: loose enough for values typed
     * with nine decimals (0.333333333 three times), tight enough to catch a
     * forgotten entry.
     */
    constexpr double probability_sum_tolerance = 1e-9;

    /** Numbers in messages: enough digits to tell 1 from 1.0000001. */
    std::string fmt(const double x)
    {
      std::ostringstream out;
      out.precision(12);
      out << x;
      return out.str();
    }

    /**
     * Parses a whole token as a double; false if anything is left over.
     * Overflow yields ±inf, which the callers report as "not finite".
     */
    bool parse_double(const std::string &token, double &value)
    {
      if (token.empty())
        return false;
      char *end = nullptr;
      value     = std::strtod(token.c_str(), &end);
      return end == token.c_str() + token.size();
    }

    /** Parses a whole token as a signed decimal integer; false if anything is left over. */
    bool parse_integer(const std::string &token, long long &value)
    {
      if (token.empty())
        return false;
      char *end = nullptr;
      errno     = 0;
      value     = std::strtoll(token.c_str(), &end, 10);
      return end == token.c_str() + token.size() && errno != ERANGE;
    }

    /** A comma-separated list of finite doubles from parameter @p name. */
    std::vector<double> parse_double_list(const std::string &text, const std::string &name)
    {
      std::vector<double> result;
      for (const std::string &entry : dealii::Utilities::split_string_list(text, ','))
        {
          double value = 0;
          if (!parse_double(entry, value) || !std::isfinite(value))
            throw InputError(name + ": '" + entry + "' is not a finite number");
          result.push_back(value);
        }
      return result;
    }

    void require_finite(const double x, const std::string &name)
    {
      if (!std::isfinite(x))
        throw InputError(name + " = " + fmt(x) + " is not allowed, it must be a finite number");
    }


    /** Uniform law on [a, b]. */
    class UniformLaw : public SingleSiteLaw
    {
    public:
      UniformLaw(const double a, const double b)
        : a_(a)
        , b_(b)
      {}
      double quantile(const double u) const override { return a_ + u * (b_ - a_); }
      double mean() const override { return 0.5 * (a_ + b_); }
      double variance() const override { return (b_ - a_) * (b_ - a_) / 12.0; }
      double support_min() const override { return a_; }
      double support_max() const override { return b_; }
      std::string description() const override
      {
        return "uniform on [" + fmt(a_) + ", " + fmt(b_) + "]";
      }

    private:
      double a_, b_;
    };


    /**
     * A law with finitely many values. Values are kept sorted so that
     * quantile() is the true (non-decreasing) inverse distribution function:
     * then the same uniform u gives the same rank under every law, which makes
     * realisations of different laws comparable (a monotone coupling).
     */
    class DiscreteLaw : public SingleSiteLaw
    {
    public:
      DiscreteLaw(std::vector<std::pair<double, double>> value_probability,
                  std::string                            description)
        : description_(std::move(description))
      {
        std::sort(value_probability.begin(), value_probability.end());
        double sum = 0;
        for (const auto &vp : value_probability)
          sum += vp.second;
        double cumulative = 0;
        for (const auto &vp : value_probability)
          {
            const double p = vp.second / sum;
            values_.push_back(vp.first);
            probabilities_.push_back(p);
            cumulative += p;
            cumulative_.push_back(cumulative);
          }
        // Exactly 1 so that every u < 1 finds an entry despite rounding.
        cumulative_.back() = 1.0;

        mean_ = 0;
        for (std::size_t i = 0; i < values_.size(); ++i)
          mean_ += probabilities_[i] * values_[i];
        // Two-pass formula: no cancellation when the mean is large.
        variance_ = 0;
        for (std::size_t i = 0; i < values_.size(); ++i)
          variance_ += probabilities_[i] * (values_[i] - mean_) * (values_[i] - mean_);

        // Values of probability zero are not in the support.
        support_min_ = support_max_ = mean_;
        bool first = true;
        for (std::size_t i = 0; i < values_.size(); ++i)
          if (probabilities_[i] > 0)
            {
              support_min_ = first ? values_[i] : std::min(support_min_, values_[i]);
              support_max_ = first ? values_[i] : std::max(support_max_, values_[i]);
              first        = false;
            }
      }

      double quantile(const double u) const override
      {
        // F^{-1}(u) = min{ v_i : F(v_i) >= u }. For u in (0, 1) this never
        // returns a value of probability zero: its cumulative sum equals the
        // previous one, which is found first.
        const auto it = std::lower_bound(cumulative_.begin(), cumulative_.end(), u);
        return values_[std::min<std::size_t>(it - cumulative_.begin(), values_.size() - 1)];
      }
      double      mean() const override { return mean_; }
      double      variance() const override { return variance_; }
      double      support_min() const override { return support_min_; }
      double      support_max() const override { return support_max_; }
      std::string description() const override { return description_; }

    private:
      std::vector<double> values_, probabilities_, cumulative_;
      double              mean_ = 0, variance_ = 0, support_min_ = 0, support_max_ = 0;
      std::string         description_;
    };
  } // namespace


  std::unique_ptr<SingleSiteLaw> make_uniform_law(const double a, const double b)
  {
    require_finite(a, "potential/minimum");
    require_finite(b, "potential/maximum");
    if (!(a < b))
      throw InputError("potential/maximum = " + fmt(b) +
                       " must be greater than potential/minimum = " + fmt(a));
    return std::make_unique<UniformLaw>(a, b);
  }


  std::unique_ptr<SingleSiteLaw> make_bernoulli_law(const double c, const double q_a,
                                                    const double q_b)
  {
    if (!(c >= 0.0 && c <= 1.0))
      throw InputError("potential/concentration = " + fmt(c) +
                       " is outside the allowed range [0, 1]");
    require_finite(q_a, "potential/value A");
    require_finite(q_b, "potential/value B");
    return std::make_unique<DiscreteLaw>(
      std::vector<std::pair<double, double>>{{q_a, c}, {q_b, 1.0 - c}},
      "bernoulli: " + fmt(q_a) + " with probability " + fmt(c) + ", else " + fmt(q_b));
  }


  std::unique_ptr<SingleSiteLaw> make_discrete_law(const std::vector<double> &values,
                                                   const std::vector<double> &probabilities)
  {
    if (values.empty() || values.size() > max_discrete_values)
      throw InputError("potential/values: " + std::to_string(values.size()) +
                       " values given, allowed are 1 to " +
                       std::to_string(max_discrete_values));
    if (probabilities.size() != values.size())
      throw InputError("potential/probabilities: " + std::to_string(probabilities.size()) +
                       " entries given, but potential/values has " +
                       std::to_string(values.size()) + "; the lists must have equal length");
    double sum = 0;
    std::vector<std::pair<double, double>> vp;
    std::ostringstream                     description;
    description << "discrete:";
    for (std::size_t i = 0; i < values.size(); ++i)
      {
        require_finite(values[i], "potential/values entry " + std::to_string(i + 1));
        if (!(probabilities[i] >= 0.0) || !std::isfinite(probabilities[i]))
          throw InputError("potential/probabilities: entry " + std::to_string(i + 1) + " = " +
                           fmt(probabilities[i]) + " is not allowed, it must be >= 0");
        sum += probabilities[i];
        vp.emplace_back(values[i], probabilities[i]);
        description << (i > 0 ? "," : "") << " " << fmt(values[i]) << " (p = "
                    << fmt(probabilities[i]) << ")";
      }
    if (std::abs(sum - 1.0) > probability_sum_tolerance)
      throw InputError("potential/probabilities: the entries sum to " + fmt(sum) +
                       ", they must sum to 1 within " + fmt(probability_sum_tolerance));
    return std::make_unique<DiscreteLaw>(std::move(vp), description.str());
  }


  std::vector<double> read_cell_values(const std::string &path, const Lattice &lattice)
  {
    std::ifstream in(path);
    if (!in)
      throw InputError("potential/file: cannot open the cell-values file '" + path + "'");

    const unsigned int                dim   = lattice.dimension();
    const std::size_t                 n     = lattice.n_cells();
    std::vector<double>               values(n, 0.0);
    // Line of the first occurrence of each cell (0: not seen yet), so that a
    // duplicate can point back to where the cell was first given.
    std::vector<std::size_t>          first_line(n, 0);
    std::size_t                       n_seen = 0;
    std::string                       line;
    std::size_t                       line_number = 0;
    const auto where = [&](const std::size_t l) {
      return "cell-values file '" + path + "', line " + std::to_string(l) + ": ";
    };

    while (std::getline(in, line))
      {
        ++line_number;
        const std::size_t hash = line.find('#');
        if (hash != std::string::npos)
          line.erase(hash);
        std::istringstream       fields(line);
        std::vector<std::string> tokens;
        for (std::string t; fields >> t;)
          tokens.push_back(t);
        if (tokens.empty())
          continue;
        if (tokens.size() != dim + 1)
          throw InputError(where(line_number) + "expected " + std::to_string(dim + 1) +
                           " fields (" + std::to_string(dim) +
                           " cell indices and a value), found " +
                           std::to_string(tokens.size()));

        std::array<unsigned int, 3> c{{0, 0, 0}};
        for (unsigned int d = 0; d < dim; ++d)
          {
            long long index = 0;
            if (!parse_integer(tokens[d], index))
              throw InputError(where(line_number) + "cell index " + std::to_string(d + 1) +
                               " '" + tokens[d] + "' is not an integer");
            if (index < 0 || index >= static_cast<long long>(lattice.cells()[d]))
              throw InputError(where(line_number) + "cell index " + std::to_string(d + 1) +
                               " = " + tokens[d] + " is outside the allowed range [0, " +
                               std::to_string(lattice.cells()[d] - 1) + "]");
            c[d] = static_cast<unsigned int>(index);
          }
        double value = 0;
        if (!parse_double(tokens[dim], value))
          throw InputError(where(line_number) + "the value '" + tokens[dim] +
                           "' is not a number");
        if (!std::isfinite(value))
          throw InputError(where(line_number) + "the value '" + tokens[dim] +
                           "' is not finite");

        const std::size_t index = lattice.cell_index(c);
        if (first_line[index] != 0)
          {
            std::string cell;
            for (unsigned int d = 0; d < dim; ++d)
              cell += (d > 0 ? ", " : "") + std::to_string(c[d]);
            throw InputError(where(line_number) + "cell (" + cell +
                             ") is given twice, first on line " +
                             std::to_string(first_line[index]));
          }
        first_line[index] = line_number;
        values[index]     = value;
        ++n_seen;
      }
    if (in.bad())
      throw InputError("potential/file: error while reading the cell-values file '" + path +
                       "' after line " + std::to_string(line_number));

    if (n_seen != n)
      {
        const std::size_t first_missing =
          std::find(first_line.begin(), first_line.end(), 0) - first_line.begin();
        const std::array<unsigned int, 3> c = lattice.cell_coordinates(first_missing);
        std::string                       cell;
        for (unsigned int d = 0; d < dim; ++d)
          cell += (d > 0 ? ", " : "") + std::to_string(c[d]);
        throw InputError("cell-values file '" + path + "': " + std::to_string(n - n_seen) +
                         " of " + std::to_string(n) + " cells are missing, the first is (" +
                         cell + ")");
      }
    return values;
  }


  void PotentialModel::declare_parameters(dealii::ParameterHandler &prm)
  {
    using namespace dealii::Patterns;
    prm.enter_subsection("potential");
    prm.declare_entry("law",
                      "uniform",
                      Selection("uniform|bernoulli|discrete|file"),
                      "Law of the potential value q_n on each unit cell; the q_n are "
                      "independent and identically distributed. 'uniform': uniform on "
                      "[minimum, maximum]. 'bernoulli': binary alloy, 'value A' with "
                      "probability 'concentration', else 'value B'. 'discrete': 'values' "
                      "with 'probabilities'. 'file': one fixed potential read from 'file' "
                      "(the same for every realisation).");
    prm.declare_entry("minimum", "0", Double(), "Uniform law: lower end of the interval.");
    prm.declare_entry("maximum",
                      "1",
                      Double(),
                      "Uniform law: upper end of the interval, greater than 'minimum'.");
    prm.declare_entry("concentration",
                      "0.2",
                      Double(0, 1),
                      "Bernoulli law: probability c in [0, 1] that a cell takes 'value A'.");
    prm.declare_entry("value A", "1.5", Double(), "Bernoulli law: value with probability c.");
    prm.declare_entry("value B", "0", Double(), "Bernoulli law: value with probability 1 - c.");
    prm.declare_entry("values",
                      "0, 1",
                      List(Double(), 1, max_discrete_values),
                      "Discrete law: the possible values (1 to 64, comma-separated).");
    prm.declare_entry("probabilities",
                      "0.5, 0.5",
                      List(Double(0), 1, max_discrete_values),
                      "Discrete law: probability of each entry of 'values' (same length, "
                      "non-negative, summing to 1 within 1e-9; renormalised to sum 1).");
    prm.declare_entry("file",
                      "",
                      Anything(),
                      "File law: path of the cell-values file (relative paths are relative "
                      "to the working directory). One line per cell: the 0-based integer "
                      "cell indices (as many as the lattice has directions), then the "
                      "value. Text after '#' and blank lines are ignored; every cell must "
                      "appear exactly once.");
    prm.leave_subsection();
  }


  void PotentialModel::parse_parameters(dealii::ParameterHandler &prm, const Lattice &lattice)
  {
    prm.enter_subsection("potential");
    const std::string law = prm.get("law");
    // Read everything before validating so that the subsection is always left.
    const double      minimum       = prm.get_double("minimum");
    const double      maximum       = prm.get_double("maximum");
    const double      concentration = prm.get_double("concentration");
    const double      value_a       = prm.get_double("value A");
    const double      value_b       = prm.get_double("value B");
    const std::string values        = prm.get("values");
    const std::string probabilities = prm.get("probabilities");
    const std::string file          = prm.get("file");
    prm.leave_subsection();

    if (law == "uniform")
      set_law(make_uniform_law(minimum, maximum), lattice);
    else if (law == "bernoulli")
      set_law(make_bernoulli_law(concentration, value_a, value_b), lattice);
    else if (law == "discrete")
      set_law(make_discrete_law(parse_double_list(values, "potential/values"),
                                parse_double_list(probabilities, "potential/probabilities")),
              lattice);
    else if (law == "file")
      {
        if (file.empty())
          throw InputError("potential/file: must name a cell-values file when "
                           "potential/law = file");
        set_fixed_values(read_cell_values(file, lattice), lattice);
        fixed_source_ = "file '" + file + "'";
      }
    else
      throw InputError("potential/law: '" + law +
                       "' is not one of uniform, bernoulli, discrete, file");
  }


  void PotentialModel::set_law(std::unique_ptr<SingleSiteLaw> law, const Lattice &lattice)
  {
    if (!law)
      throw std::invalid_argument("PotentialModel::set_law: null law");
    law_     = std::move(law);
    n_cells_ = lattice.n_cells();
    fixed_values_.clear();
    fixed_source_.clear();
  }


  void PotentialModel::set_fixed_values(std::vector<double> values, const Lattice &lattice)
  {
    if (values.size() != lattice.n_cells())
      throw std::invalid_argument("PotentialModel::set_fixed_values: " +
                                  std::to_string(values.size()) + " values for " +
                                  std::to_string(lattice.n_cells()) + " cells");
    law_.reset();
    fixed_values_ = std::move(values);
    n_cells_      = fixed_values_.size();
    fixed_source_ = "given values";
  }


  std::vector<double> PotentialModel::cell_values(const std::uint64_t seed,
                                                  const std::uint64_t realisation) const
  {
    if (!law_)
      {
        if (n_cells_ == 0)
          throw std::logic_error("PotentialModel::cell_values: no law and no values set");
        return fixed_values_;
      }
    std::vector<double> q(n_cells_);
    for (std::size_t n = 0; n < n_cells_; ++n)
      q[n] = law_->quantile(uniform_open01(seed, realisation, n));
    return q;
  }


  double PotentialModel::bottom() const
  {
    if (law_)
      return law_->support_min();
    if (fixed_values_.empty())
      throw std::logic_error("PotentialModel::bottom: no law and no values set");
    return *std::min_element(fixed_values_.begin(), fixed_values_.end());
  }


  double PotentialModel::top() const
  {
    if (law_)
      return law_->support_max();
    if (fixed_values_.empty())
      throw std::logic_error("PotentialModel::top: no law and no values set");
    return *std::max_element(fixed_values_.begin(), fixed_values_.end());
  }


  std::string PotentialModel::description() const
  {
    if (law_)
      return law_->description();
    if (fixed_values_.empty())
      return "no potential set";
    return "fixed cell values (" + fixed_source_ + ") in [" + fmt(bottom()) + ", " +
           fmt(top()) + "]";
  }
} // namespace alloyspec
