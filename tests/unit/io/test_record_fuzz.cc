// Bounded, deterministic fuzzing of the record reader: a folder written by the
// store, then damaged in generated ways (bytes flipped, lines deleted,
// duplicated, swapped or cut, fields replaced by junk or non-finite numbers,
// Windows line ends). The reader may only return records or throw InputError;
// and when it returns after a damage that is not a plain cut at the end of a
// file, every record it returns must be one of the originals, unchanged:
// damage is never read as different numbers. The generator is std::mt19937,
// whose output sequence the C++ standard fixes, used without distribution
// classes (their output is implementation-defined).
#include <alloyspec/core/errors.h>
#include <alloyspec/io/record_reader.h>
#include <alloyspec/io/results_store.h>

#include <gtest/gtest.h>

#include <filesystem>
#include <fstream>
#include <random>
#include <sstream>
#include <string>
#include <vector>

#include <unistd.h>

namespace
{
  using alloyspec::RealisationRecord;
  namespace fs = std::filesystem;

  constexpr unsigned int cases_per_kind = 80;

  std::size_t pick(std::mt19937 &rng, std::size_t n) { return static_cast<std::size_t>(rng() % n); }

  std::vector<RealisationRecord> originals()
  {
    std::vector<RealisationRecord> records;
    for (std::uint64_t r = 0; r < 4; ++r)
      for (const char *b : {"dirichlet", "neumann"})
        {
          RealisationRecord x;
          x.realisation = r;
          x.boundary    = b;
          for (int i = 0; i < 4; ++i)
            {
              x.eigenvalues.push_back(0.25 + 0.5 * i + 0.01 * r);
              x.residuals.push_back(1e-13);
              x.inverse_participation_ratios.push_back(0.02);
              x.central_weights.push_back(0.1);
            }
          x.complete_up_to = 2.0;
          x.inertia_count  = 4;
          x.potential_min  = 0;
          x.potential_max  = 1.5;
          x.solve_seconds  = 0.5;
          x.attempts       = 1;
          records.push_back(x);
        }
    return records;
  }

  std::vector<std::string> split_lines(const std::string &text)
  {
    std::vector<std::string> lines;
    std::istringstream       in(text);
    for (std::string l; std::getline(in, l);)
      lines.push_back(l);
    return lines;
  }

  std::string join(const std::vector<std::string> &lines)
  {
    std::string s;
    for (const auto &l : lines)
      s += l + "\n";
    return s;
  }

  bool is_original(const RealisationRecord &r, const std::vector<RealisationRecord> &all)
  {
    for (const auto &o : all)
      if (o.realisation == r.realisation && o.boundary == r.boundary &&
          o.eigenvalues == r.eigenvalues && o.residuals == r.residuals &&
          o.complete_up_to == r.complete_up_to && o.inertia_count == r.inertia_count &&
          o.potential_min == r.potential_min && o.potential_max == r.potential_max)
        return true;
    return false;
  }
} // namespace

TEST(RecordFuzz, DamageIsRefusedOrReadAsTheOriginals)
{
  const fs::path folder =
    fs::temp_directory_path() / ("alloyspec_record_fuzz_" + std::to_string(::getpid()));
  fs::remove_all(folder);
  const auto records = originals();
  std::string eigen, summary;
  {
    const alloyspec::ResultsStore store(folder.string(), false);
    for (const auto &r : records)
      store.append(r);
    std::ifstream e(folder / "eigenvalues.csv"), s(folder / "realisations.csv");
    std::ostringstream a, b;
    a << e.rdbuf();
    b << s.rdbuf();
    eigen   = a.str();
    summary = b.str();
  }
  std::mt19937 rng(15);
  const std::vector<std::string> junk = {"nan", "inf", "-inf", "-1e300", "1e999", "", "x", "0x1p3",
                                         "1 ", " 1", "1,2", "-0", "+5", "1e-400", "NaN", "4294967296"};
  unsigned int n = 0, refused = 0;
  for (unsigned int kind = 0; kind < 8; ++kind)
    for (unsigned int i = 0; i < cases_per_kind; ++i, ++n)
      {
        const bool  in_eigen = (i % 2) == 0;
        std::string text     = in_eigen ? eigen : summary;
        auto        lines    = split_lines(text);
        const std::size_t k  = 1 + pick(rng, lines.size() - 1); // a data line
        std::string what;
        switch (kind)
          {
            case 0: // one byte replaced by any byte
              {
                const std::size_t at = pick(rng, text.size());
                text[at]             = static_cast<char>(rng() & 0xff);
                what                 = "byte " + std::to_string(at) + " replaced";
                break;
              }
            case 1:
              lines.erase(lines.begin() + static_cast<long>(k));
              text = join(lines);
              what = "line " + std::to_string(k + 1) + " deleted";
              break;
            case 2:
              lines.insert(lines.begin() + static_cast<long>(k), lines[k]);
              text = join(lines);
              what = "line " + std::to_string(k + 1) + " duplicated";
              break;
            case 3:
              {
                const std::size_t j = 1 + pick(rng, lines.size() - 1);
                if (j == k || lines[j] == lines[k])
                  continue;
                std::swap(lines[j], lines[k]);
                text = join(lines);
                what = "lines swapped";
                break;
              }
            case 4: // a field replaced by junk
              {
                std::vector<std::string> f;
                std::stringstream        in(lines[k]);
                for (std::string x; std::getline(in, x, ',');)
                  f.push_back(x);
                const std::size_t field = pick(rng, f.size());
                f[field]                = junk[pick(rng, junk.size())];
                std::string joined;
                for (std::size_t m = 0; m < f.size(); ++m)
                  joined += (m ? "," : "") + f[m];
                lines[k] = joined;
                text     = join(lines);
                what     = "field " + std::to_string(field) + " = '" + f[field] + "'";
                break;
              }
            case 5: // Windows line ends from some line on
              for (std::size_t m = k; m < lines.size(); ++m)
                lines[m] += "\r";
              text = join(lines);
              what = "CR from line " + std::to_string(k + 1);
              break;
            case 6: // cut inside the file, then more lines (damage, not a crash)
              {
                const std::size_t cut = pick(rng, text.size());
                text = text.substr(0, cut) + text.substr(std::min(text.size(), cut + 1 + pick(rng, 40)));
                what = "bytes removed at " + std::to_string(cut);
                break;
              }
            default: // a cut at the end: the crash case, read or refused, never different
              text = text.substr(0, pick(rng, text.size() + 1));
              what = "cut at the end";
              break;
          }
        if (text == (in_eigen ? eigen : summary))
          continue; // a mutation that changed nothing
        std::ofstream(folder / "eigenvalues.csv", std::ios::trunc | std::ios::binary)
          << (in_eigen ? text : eigen);
        std::ofstream(folder / "realisations.csv", std::ios::trunc | std::ios::binary)
          << (in_eigen ? summary : text);
        const std::string where = std::string(in_eigen ? "eigenvalues.csv" : "realisations.csv") +
                                  ": " + what;
        try
          {
            const auto back = alloyspec::read_stored_records(folder.string());
            // A changed digit can make another valid number: only kinds that
            // cannot are held to "the originals or nothing".
            if (kind != 0 && kind != 4 && kind != 6)
              for (const auto &r : back.records)
                EXPECT_TRUE(is_original(r, records)) << where << ": read a record that was not stored";
            if (back.records.size() < records.size() && kind != 0 && kind != 4 && kind != 6)
              EXPECT_FALSE(back.warnings.empty()) << where << ": records dropped without a warning";
          }
        catch (const alloyspec::InputError &e)
          {
            ++refused;
            EXPECT_NE(std::string(e.what()).find(".csv"), std::string::npos) << where << ": " << e.what();
          }
        catch (const std::exception &e)
          {
            ADD_FAILURE() << where << ": not an InputError: " << e.what();
          }
      }
  fs::remove_all(folder);
  EXPECT_GE(n, 600u);
  std::cout << n << " damaged folders, " << refused << " refused\n";
}
