// Bounded, deterministic fuzzing of the two readers of user files: the
// parameter file (through the command line, in-process) and the cell-values
// file. Every generated case is invalid by construction, so each must end in
// an InputError (exit status 2) with a message — no crash, no hang, no
// acceptance. The generator is std::mt19937, whose output sequence the C++
// standard fixes ([rand.predef]: the 10000th value of the default-seeded engine
// is 4123659995), so the same cases run everywhere; no distribution classes
// are used, as their output is implementation-defined.
#include <alloyspec/app/command_line.h>
#include <alloyspec/core/errors.h>
#include <alloyspec/model/lattice.h>
#include <alloyspec/model/potential_model.h>
#include <alloyspec/model/energy_grid.h>

#include <deal.II/base/parameter_handler.h>

#include <gtest/gtest.h>

#include <filesystem>
#include <fstream>
#include <random>
#include <string>
#include <vector>

#include <unistd.h>

namespace
{
  namespace fs = std::filesystem;

  constexpr unsigned int cases_per_kind = 40;

  fs::path work_folder()
  {
    static const fs::path folder =
      fs::temp_directory_path() / ("alloyspec_fuzz_" + std::to_string(::getpid()));
    fs::create_directories(folder);
    return folder;
  }

  void write(const fs::path &p, const std::string &text)
  {
    std::ofstream out(p, std::ios::binary | std::ios::trunc);
    out << text;
  }

  /** Uniform-enough pick in [0, n) from the raw engine output (n is small). */
  std::size_t pick(std::mt19937 &rng, std::size_t n)
  {
    return static_cast<std::size_t>(rng() % n);
  }

  /** Characters that can never form a number, a word or a comment. */
  std::string junk(std::mt19937 &rng)
  {
    static const std::string symbols = "!@$%^&*()[]{}<>?~`|;'\"_";
    std::string              s;
    const std::size_t        n = 1 + pick(rng, 8);
    for (std::size_t i = 0; i < n; ++i)
      s += symbols[pick(rng, symbols.size())];
    return s;
  }

  /** Runs `alloyspec run FILE --print-parameters`; returns (status, stderr). */
  std::pair<int, std::string> run_cli(const fs::path &file)
  {
    std::vector<std::string> args = {"alloyspec", "run", file.string(), "--print-parameters",
                                     "--no-progress", "--output",
                                     (work_folder() / "never_written").string()};
    std::vector<char *> argv;
    for (auto &a : args)
      argv.push_back(a.data());
    testing::internal::CaptureStdout();
    testing::internal::CaptureStderr();
    const int   status = alloyspec::run_command_line(static_cast<int>(argv.size()), argv.data());
    const auto  err    = testing::internal::GetCapturedStderr();
    (void)testing::internal::GetCapturedStdout();
    return {status, err};
  }

  /** A valid 3D parameter file (invented values) that every mutation starts from. */
  const char *const valid_file = R"(subsection lattice
  set cells = 3, 3, 3
  set cell size = 1
end
subsection potential
  set law = bernoulli
  set concentration = 0.2
  set value A = 1.5
  set value B = 0
end
subsection discretisation
  set degree = 2
  set elements per cell = 1
end
subsection spectrum
  set boundary conditions = dirichlet, neumann
  set eigenvalues = 10
  set tolerance = 1e-10
end
subsection study
  set realisations = 2
  set seed = 1
  set energies = 0 to 3 by 0.1
end
)";

  /** Replaces the value of "set NAME = ..." in @p text. */
  std::string with_value(std::string text, const std::string &name, const std::string &value)
  {
    const std::string key = "set " + name + " =";
    const auto        at  = text.find(key);
    EXPECT_NE(at, std::string::npos) << name;
    const auto end = text.find('\n', at);
    return text.replace(at, end - at, key + " " + value);
  }

  void expect_input_error(const std::string &text, const std::string &what)
  {
    const fs::path file = work_folder() / "case.prm";
    write(file, text);
    const auto [status, message] = run_cli(file);
    EXPECT_EQ(status, 2) << what << "\n--- file:\n" << text << "--- stderr:\n" << message;
    EXPECT_NE(message.find("alloyspec: error:"), std::string::npos) << what << ": " << message;
    EXPECT_GT(message.size(), std::string("alloyspec: error: \n").size()) << what;
  }
} // namespace

TEST(InputFuzz, ValidBaseFileIsAccepted)
{
  // Guards the generator: the mutations below break a file that is valid.
  const fs::path file = work_folder() / "valid.prm";
  write(file, valid_file);
  const auto [status, message] = run_cli(file);
  ASSERT_EQ(status, 0) << message;
}

TEST(InputFuzz, OutOfRangeAndMalformedValues)
{
  // Hand-picked invalid values per entry (each outside the documented range).
  const std::vector<std::pair<std::string, std::vector<std::string>>> bad = {
    {"cells", {"0, 3, 3", "-1, 3, 3", "3, 3, 3, 3", "", "3.5, 3, 3", "99999999999, 1, 1", "3,,3", "a, b, c"}},
    {"cell size", {"0", "-1", "nan", "inf", "1e400", "", "1 m"}},
    {"law", {"lognormal", "", "Bernoulli ", "uniform uniform"}},
    {"concentration", {"-0.1", "1.5", "nan", "", "0.2.3"}},
    {"value A", {"nan", "inf", "-inf", "", "1e999"}},
    {"degree", {"0", "5", "-2", "2.5", "", "two"}},
    {"elements per cell", {"0", "9", "-1", "", "1e3"}},
    {"boundary conditions", {"", "robin", "dirichlet, dirichlet", "dirichlet; neumann"}},
    {"eigenvalues", {"0", "-5", "1e9", "", "ten"}},
    {"tolerance", {"0", "1", "-1e-10", "nan", ""}},
    {"realisations", {"0", "-1", "4294967296", "1.5", "", "1e3"}},
    {"seed", {"-1", "18446744073709551616", "0x10", "", "1 2"}},
    {"energies", {"", "3 to 0 by 0.1", "0 to 1 by 0", "0 to 1 by -0.1", "0 to 1 by 1e-300",
                  "1, 0.5", "0, 0, 1", "nan to 2 by 1", "0 to 0.1", "0 to 1 by 0.1 by 2",
                  "a to b by c", "0 to 1 by inf", "0:0.1:1"}},
  };
  std::size_t n = 0;
  for (const auto &[name, values] : bad)
    for (const auto &value : values)
      {
        expect_input_error(with_value(valid_file, name, value), name + " = '" + value + "'");
        ++n;
      }
  // Generated: junk in every entry that is always read.
  std::mt19937 rng(1);
  for (unsigned int i = 0; i < cases_per_kind; ++i)
    for (const auto &[name, values] : bad)
      {
        const std::string value = junk(rng);
        expect_input_error(with_value(valid_file, name, value), name + " = '" + value + "'");
        ++n;
      }
  EXPECT_GE(n, 500u);
}

TEST(InputFuzz, BrokenStructure)
{
  std::mt19937      rng(2);
  const std::string text = valid_file;
  const auto        last_end = text.rfind("end");
  std::vector<std::size_t> line_starts;
  for (std::size_t i = 0; i < text.size(); ++i)
    if (i == 0 || text[i - 1] == '\n')
      line_starts.push_back(i);
  for (unsigned int i = 0; i < cases_per_kind; ++i)
    {
      // Cut anywhere before the last "end" but not just after an "end" line
      // (the rest would be a valid file using defaults): a subsection stays
      // open, or the last line is broken.
      std::size_t cut = pick(rng, last_end);
      while (cut >= 3 && (text.compare(cut - 3, 3, "end") == 0 ||
                          (cut >= 4 && text.compare(cut - 4, 4, "end\n") == 0)))
        --cut;
      expect_input_error(text.substr(0, cut), "file cut after " + std::to_string(cut) + " bytes");
      // An undeclared entry, an undeclared subsection, a junk line, an extra
      // "end", a "set" without "=": each at a random line.
      const std::size_t at = line_starts[pick(rng, line_starts.size())];
      const std::string insertions[] = {
        "set no such entry " + std::to_string(i) + " = 1\n",
        "subsection nowhere" + std::to_string(i) + "\nend\n",
        junk(rng) + "\n",
        "end\n",
        "set cells 3, 3, 3\n",
      };
      for (const auto &line : insertions)
        expect_input_error(text.substr(0, at) + line + text.substr(at),
                           "inserted '" + line + "' at byte " + std::to_string(at));
    }
  // A file that does not exist, and one that is a folder.
  const auto [status, message] = run_cli(work_folder() / "missing.prm");
  EXPECT_EQ(status, 2) << message;
}

TEST(InputFuzz, EnergyGridParser)
{
  // In-process: junk and adversarial grids (a step so small the grid would
  // not fit in memory must be refused, not attempted).
  std::mt19937 rng(3);
  const std::vector<std::string> fixed = {"0 to 1 by 1e-300", "0 to 1 by 5e-7",
                                          "-1e308 to 1e308 by 1e300", "1e400 to 2 by 1",
                                          "to", "to by", ":", "::", ",", "1,", ",1", "1,,2",
                                          "0 to nan by 1", "0:1:2"};
  for (const auto &text : fixed)
    EXPECT_THROW(alloyspec::parse_energy_grid(text, "study/energies"), alloyspec::InputError)
      << text;
  for (unsigned int i = 0; i < 5 * cases_per_kind; ++i)
    {
      std::string text = junk(rng);
      // Splice a separator into the junk sometimes, to reach the range/list branches.
      if (i % 3 == 0)
        text = "0 to " + text + " by 1";
      else if (i % 3 == 1)
        text = "0, " + text;
      EXPECT_THROW(alloyspec::parse_energy_grid(text, "study/energies"), alloyspec::InputError)
        << text;
    }
}

TEST(InputFuzz, CellValuesFile)
{
  const alloyspec::Lattice lattice({3, 2});
  const fs::path           file = work_folder() / "cells.txt";
  auto valid_lines = [] {
    std::vector<std::string> lines;
    for (int j = 0; j < 2; ++j)
      for (int i = 0; i < 3; ++i)
        lines.push_back(std::to_string(i) + " " + std::to_string(j) + " " +
                        std::to_string(0.25 * (i + 3 * j)));
    return lines;
  };
  auto join = [](const std::vector<std::string> &lines) {
    std::string s;
    for (const auto &l : lines)
      s += l + "\n";
    return s;
  };
  auto expect_error = [&](const std::string &text, const std::string &what) {
    write(file, text);
    try
      {
        (void)alloyspec::read_cell_values(file.string(), lattice);
        ADD_FAILURE() << what << " was accepted:\n" << text;
      }
    catch (const alloyspec::InputError &e)
      {
        EXPECT_GT(std::string(e.what()).size(), 10u) << what;
      }
    catch (const std::exception &e)
      {
        ADD_FAILURE() << what << " threw a non-input error: " << e.what();
      }
  };
  write(file, join(valid_lines()));
  ASSERT_EQ(alloyspec::read_cell_values(file.string(), lattice).size(), 6u);

  const std::vector<std::string> bad_lines = {
    "3 0 1.0", "0 2 1.0", "-1 0 1.0", "0 0", "0 0 1.0 2.0", "0 0 nan", "0 0 inf", "0 0 1e400",
    "x 0 1.0", "0 0 1.0x", "0.5 0 1.0", "99999999999999999999 0 1", "0 0 --1", "0,0,1"};
  std::mt19937 rng(4);
  for (unsigned int i = 0; i < cases_per_kind; ++i)
    {
      auto lines = valid_lines();
      // Replace one line by a bad one (or by junk).
      const std::size_t k = pick(rng, lines.size());
      lines[k] = (i % 4 == 3) ? junk(rng) : bad_lines[pick(rng, bad_lines.size())];
      expect_error(join(lines), "line " + std::to_string(k + 1) + " = '" + lines[k] + "'");
      // Drop one line (a missing cell), or duplicate one.
      auto missing = valid_lines();
      missing.erase(missing.begin() + pick(rng, missing.size()));
      expect_error(join(missing), "a missing cell");
      auto twice = valid_lines();
      twice.push_back(twice[pick(rng, twice.size())]);
      expect_error(join(twice), "a duplicated cell");
      // Binary garbage.
      std::string bytes;
      for (int b = 0; b < 40; ++b)
        bytes += static_cast<char>(rng() & 0xff);
      expect_error(bytes, "binary garbage");
    }
  expect_error("", "an empty file");
  expect_error("# only a comment\n", "a comment only");
  EXPECT_THROW(alloyspec::read_cell_values((work_folder() / "absent.txt").string(), lattice),
               alloyspec::InputError);
}
