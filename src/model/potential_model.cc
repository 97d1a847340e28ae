/** @file potential_model.cc  The cell-values file, the parameters of subsection "potential", the random cell potential. */
#include <alloyspec/core/text_input.h>
#include <alloyspec/core/format.h>
#include <alloyspec/core/errors.h>
#include <alloyspec/model/lattice.h>
#include <alloyspec/model/potential_model.h>
#include <alloyspec/model/random_stream.h>

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
    /** Largest number of entries of a discrete law (make_discrete_law() checks the same). */
    constexpr unsigned int max_discrete_values = 64;

    /** Numbers in messages: enough digits to tell 1 from 1.0000001. */
    std::string fmt(const double x) { return short_number(x, 12); }

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
  } // namespace


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
        const std::vector<std::string> tokens = tokens_of_line(line);
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
                      Selection("uniform|bernoulli|discrete|gaussian|beta|tabulated|binomial|file"),
                      "Law of the potential value q_n on each unit cell; the q_n are "
                      "independent and identically distributed. 'uniform': uniform on "
                      "[minimum, maximum]. 'bernoulli': binary alloy, 'value A' with "
                      "probability 'concentration', else 'value B'. 'discrete': 'values' "
                      "with 'probabilities'. 'gaussian': normal law with 'mean' and "
                      "'standard deviation', conditioned on [minimum, maximum] if "
                      "'truncate' is true. 'beta': beta law with shapes 'shape at minimum' "
                      "and 'shape at maximum' stretched onto [minimum, maximum]. "
                      "'tabulated': piecewise-linear density read from 'density file'. "
                      "'binomial': coarse-grained alloy, each cell averages 'atoms per "
                      "cell' atoms, each of kind A ('value A') with probability "
                      "'concentration', else of kind B ('value B'). 'file': one fixed "
                      "potential read from 'file' (the same for every realisation).");
    prm.declare_entry("minimum",
                      "0",
                      Double(),
                      "Uniform and beta laws, and the gaussian law with 'truncate' = true: "
                      "lower end of the interval the values lie in.");
    prm.declare_entry("maximum",
                      "1",
                      Double(),
                      "Uniform and beta laws, and the gaussian law with 'truncate' = true: "
                      "upper end of the interval, greater than 'minimum'.");
    prm.declare_entry("concentration",
                      "0.2",
                      Double(0, 1),
                      "Bernoulli law: probability c in [0, 1] that a cell takes 'value A'. "
                      "Binomial law: fraction x in [0, 1] of atoms of kind A.");
    prm.declare_entry("value A",
                      "1.5",
                      Double(),
                      "Bernoulli law: value with probability c. Binomial law: value of a "
                      "cell made only of atoms of kind A.");
    prm.declare_entry("value B",
                      "0",
                      Double(),
                      "Bernoulli law: value with probability 1 - c. Binomial law: value "
                      "of a cell made only of atoms of kind B.");
    prm.declare_entry("atoms per cell",
                      "20",
                      Integer(1, max_atoms_per_cell),
                      "Binomial law: number n of atoms in one cell, in [1, 1000000]. The "
                      "cell value is value B + (value A - value B) K/n with K the number of "
                      "A atoms, binomial with n trials and probability 'concentration'; "
                      "n = 1 is the bernoulli law.");
    prm.declare_entry("mean",
                      "0",
                      Double(),
                      "Gaussian law: centre of the normal law (before any truncation).");
    prm.declare_entry("standard deviation",
                      "1",
                      Double(0),
                      "Gaussian law: spread sigma > 0 of the normal law (before any "
                      "truncation).");
    prm.declare_entry("truncate",
                      "false",
                      Bool(),
                      "Gaussian law: if true, the normal law is conditioned on [minimum, "
                      "maximum], which must come within 8 standard deviations of the mean. "
                      "For a one-sided cut put the other end far away (say 40 standard "
                      "deviations). If false the values are unbounded and the bottom of the "
                      "spectrum is minus infinity.");
    prm.declare_entry("shape at minimum",
                      "2",
                      Double(min_beta_shape, max_beta_shape),
                      "Beta law: first shape alpha in [0.1, 1000]; near 'minimum' the density "
                      "behaves like (q - minimum)^(alpha - 1).");
    prm.declare_entry("shape at maximum",
                      "2",
                      Double(min_beta_shape, max_beta_shape),
                      "Beta law: second shape beta in [0.1, 1000]; near 'maximum' the density "
                      "behaves like (maximum - q)^(beta - 1).");
    prm.declare_entry("density file",
                      "",
                      Anything(),
                      "Tabulated law: path of a text file with one point 'q h(q)' per line, q "
                      "strictly increasing, h(q) >= 0 (at least 2 points). The density is "
                      "linear between the points, zero outside, and is normalised to "
                      "integral 1 here. Text after '#' and blank lines are ignored. A relative "
                      "path written in a parameter file is taken from that file's folder; one "
                      "given with --set, from the working directory.");
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
                      "File law: path of the cell-values file. A relative path written in a "
                      "parameter file is taken from that file's folder; one given with --set, "
                      "from the working directory. One line per cell: the 0-based integer "
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
    const double      minimum            = prm.get_double("minimum");
    const double      maximum            = prm.get_double("maximum");
    const double      concentration      = prm.get_double("concentration");
    const double      value_a            = prm.get_double("value A");
    const double      value_b            = prm.get_double("value B");
    const std::string values             = prm.get("values");
    const std::string probabilities      = prm.get("probabilities");
    const long        atoms_per_cell     = prm.get_integer("atoms per cell");
    const double      mean               = prm.get_double("mean");
    const double      standard_deviation = prm.get_double("standard deviation");
    const bool        truncate           = prm.get_bool("truncate");
    const double      shape_at_minimum   = prm.get_double("shape at minimum");
    const double      shape_at_maximum   = prm.get_double("shape at maximum");
    const std::string density_file       = prm.get("density file");
    const std::string file               = prm.get("file");
    prm.leave_subsection();

    if (law == "uniform")
      set_law(make_uniform_law(minimum, maximum), lattice);
    else if (law == "bernoulli")
      set_law(make_bernoulli_law(concentration, value_a, value_b), lattice);
    else if (law == "discrete")
      set_law(make_discrete_law(parse_double_list(values, "potential/values"),
                                parse_double_list(probabilities, "potential/probabilities")),
              lattice);
    else if (law == "gaussian")
      set_law(truncate ? make_truncated_gaussian_law(mean, standard_deviation, minimum, maximum)
                       : make_gaussian_law(mean, standard_deviation),
              lattice);
    else if (law == "beta")
      set_law(make_beta_law(shape_at_minimum, shape_at_maximum, minimum, maximum), lattice);
    else if (law == "tabulated")
      {
        if (density_file.empty())
          throw InputError("potential/density file: must name a density file when "
                           "potential/law = tabulated");
        set_law(read_tabulated_law(density_file), lattice);
      }
    else if (law == "binomial")
      {
        if (atoms_per_cell < 1 || atoms_per_cell > static_cast<long>(max_atoms_per_cell))
          throw InputError("potential/atoms per cell = " + std::to_string(atoms_per_cell) +
                           " is outside the allowed range [1, " +
                           std::to_string(max_atoms_per_cell) + "]");
        set_law(make_binomial_alloy_law(static_cast<unsigned int>(atoms_per_cell),
                                        concentration, value_a, value_b),
                lattice);
      }
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
                       "' is not one of uniform, bernoulli, discrete, gaussian, beta, "
                       "tabulated, binomial, file");
  }


  void PotentialModel::set_law(std::unique_ptr<SingleSiteLaw> law, const Lattice &lattice)
  {
    if (!law)
      throw std::invalid_argument("PotentialModel::set_law: null law");
    law_     = std::move(law);
    tilted_law_.reset();
    theta_ = log_moment_ = 0;
    n_cells_ = lattice.n_cells();
    cells_   = lattice.cells();
    windows_.reset();
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
    tilted_law_.reset();
    theta_ = log_moment_ = 0;
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
    const SingleSiteLaw &law = *sampling_law();
    std::vector<double>  q(n_cells_);
    if (windows_ && tilted_law_)
      {
        // The mixture component from its own uniform, then each cell from its
        // uniform as always: tilted inside the window, from the model law outside.
        const long window = windows_->component(uniform_open01(seed, realisation, 0, window_draw));
        for (std::size_t n = 0; n < n_cells_; ++n)
          {
            const bool tilted = window >= 0 && windows_->contains(std::size_t(window), n);
            q[n] = (tilted ? *tilted_law_ : *law_).quantile(uniform_open01(seed, realisation, n));
          }
        return q;
      }
    for (std::size_t n = 0; n < n_cells_; ++n)
      q[n] = law.quantile(uniform_open01(seed, realisation, n));
    return q;
  }

  std::vector<double> PotentialModel::cell_values(const std::uint64_t seed,
                                                  const std::uint64_t realisation,
                                                  const std::vector<std::size_t> &cells) const
  {
    std::vector<double> q(cells.size());
    if (!law_)
      {
        if (n_cells_ == 0)
          throw std::logic_error("PotentialModel::cell_values: no law and no values set");
        for (std::size_t i = 0; i < cells.size(); ++i)
          q[i] = fixed_values_.at(cells[i]);
        return q;
      }
    // As the whole-box draw: the window's component first, then each cell.
    long window = -1;
    if (windows_ && tilted_law_)
      window = windows_->component(uniform_open01(seed, realisation, 0, window_draw));
    const SingleSiteLaw &law = *sampling_law();
    for (std::size_t i = 0; i < cells.size(); ++i)
      {
        const std::size_t n = cells[i];
        if (n >= n_cells_)
          throw std::logic_error("PotentialModel::cell_values: cell index beyond the lattice");
        const SingleSiteLaw &from =
          windows_ && tilted_law_ ? (window >= 0 && windows_->contains(std::size_t(window), n) ?
                                       *tilted_law_ : *law_) : law;
        q[i] = from.quantile(uniform_open01(seed, realisation, n));
      }
    return q;
  }

  void PotentialModel::set_tilt_window(const unsigned int edge, const double untilted_share)
  {
    if (edge == 0)
      {
        windows_.reset();
        return;
      }
    if (!law_)
      throw InputError("sampling/tilt window needs a random law; potential/law = file gives one "
                       "fixed potential");
    if (!(untilted_share > 0.0 && untilted_share < 1.0))
      throw InputError("sampling/untilted share: must lie strictly between 0 and 1");
    windows_ = std::make_shared<const TiltWindows>(cells_, edge, untilted_share);
  }


  void PotentialModel::set_tilt(const double theta)
  {
    if (!law_)
      throw InputError("sampling/method = tilted needs a random law; potential/law = file gives "
                       "one fixed potential (use sampling/method = plain)");
    tilted_law_.reset();
    theta_ = log_moment_ = 0;
    if (theta == 0.0)
      return;
    TiltedLaw tilted = law_->tilted(theta);
    tilted_law_      = std::move(tilted.law);
    theta_           = tilted.theta;
    log_moment_      = tilted.log_moment;
  }


  double PotentialModel::log_weight(const std::vector<double> &q) const
  {
    if (!tilted_law_)
      return 0.0;
    if (windows_)
      {
        // Per-cell log ratios ln p/p_θ = θ q + ln M, then the exact mixture ratio.
        std::vector<double> t(q.size());
        for (std::size_t n = 0; n < q.size(); ++n)
          t[n] = theta_ * q[n] + log_moment_;
        return windows_->log_weight(t);
      }
    // Neumaier's compensated sum of θ q_n + ln M over the cells.
    double sum = 0, compensation = 0;
    for (const double value : q)
      {
        const double term = theta_ * value + log_moment_;
        const double t    = sum + term;
        compensation += std::abs(sum) >= std::abs(term) ? (sum - t) + term : (term - t) + sum;
        sum = t;
      }
    return sum + compensation;
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
