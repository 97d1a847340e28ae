// ResultsStore::read on torn files: a crash (SIGKILL, power loss) can cut
// either CSV file at any byte. The contract (results_store.h): a record counts
// only once its summary line and all its eigenvalue lines are complete; torn
// remains are ignored, and a record written again after a resume replaces
// the torn one. Every cut position is tried, so no byte offset is special.
#include <alloyspec/io/results_store.h>

#include <gtest/gtest.h>

#include <filesystem>
#include <fstream>
#include <sstream>
#include <string>
#include <vector>

#include <unistd.h>

namespace
{
  using alloyspec::RealisationRecord;
  using alloyspec::ResultsStore;
  namespace fs = std::filesystem;

  /** A fresh, empty folder removed at the end of the test. */
  struct TemporaryFolder
  {
    fs::path path;
    explicit TemporaryFolder(const std::string &name)
      : path(fs::temp_directory_path() /
             ("alloyspec_store_" + std::to_string(::getpid()) + "_" + name))
    {
      fs::remove_all(path);
      fs::create_directories(path);
    }
    ~TemporaryFolder() { fs::remove_all(path); }
  };

  /** Invented records with awkward numbers (many digits, negative, tiny). */
  std::vector<RealisationRecord> sample_records()
  {
    std::vector<RealisationRecord> records;
    const char *boundaries[] = {"dirichlet", "neumann"};
    for (std::uint64_t r = 0; r < 3; ++r)
      for (int b = 0; b < 2; ++b)
        {
          RealisationRecord x;
          x.realisation = 10 + r;
          x.boundary    = boundaries[b];
          for (int i = 0; i < 3 + int(r); ++i)
            {
              x.eigenvalues.push_back(-0.5 + 1.0 / 3.0 * (i + 1) + 1e-9 * r + 0.1 * b);
              x.residuals.push_back(1e-14 * (i + 1));
              x.inverse_participation_ratios.push_back(0.0123456789 * (i + 1));
            }
          x.complete_up_to = x.eigenvalues.back() + 0.01;
          x.inertia_count  = x.eigenvalues.size();
          x.potential_min  = -1.25;
          x.potential_max  = 3.0 / 7.0;
          x.solve_seconds  = 0.125;
          x.attempts       = 1;
          records.push_back(x);
        }
    return records;
  }

  std::string slurp(const fs::path &p)
  {
    std::ifstream      in(p, std::ios::binary);
    std::ostringstream s;
    s << in.rdbuf();
    return s.str();
  }

  void spit(const fs::path &p, const std::string &text)
  {
    std::ofstream out(p, std::ios::binary | std::ios::trunc);
    out << text;
  }

  void expect_same(const RealisationRecord &a, const RealisationRecord &b)
  {
    EXPECT_EQ(a.realisation, b.realisation);
    EXPECT_EQ(a.boundary, b.boundary);
    // %.17g round-trips every double exactly (IEEE 754: 17 significant digits suffice).
    EXPECT_EQ(a.eigenvalues, b.eigenvalues);
    EXPECT_EQ(a.residuals, b.residuals);
    EXPECT_EQ(a.complete_up_to, b.complete_up_to);
    EXPECT_EQ(a.inertia_count, b.inertia_count);
    EXPECT_EQ(a.attempts, b.attempts);
  }

  /** Writes @p records through the store and returns the two files' contents. */
  std::pair<std::string, std::string> written(const std::vector<RealisationRecord> &records)
  {
    TemporaryFolder    folder("full");
    const ResultsStore store(folder.path.string(), false);
    for (const auto &r : records)
      store.append(r);
    return {slurp(folder.path / "eigenvalues.csv"), slurp(folder.path / "realisations.csv")};
  }

  /** Number of records whose lines lie wholly (with their newline) in the first @p cut bytes. */
  std::size_t complete_before(const std::string &text, std::size_t cut, std::size_t header_lines,
                              const std::vector<std::size_t> &lines_per_record)
  {
    std::size_t newlines = 0;
    for (std::size_t i = 0; i < cut; ++i)
      newlines += text[i] == '\n';
    if (newlines < header_lines)
      return 0;
    newlines -= header_lines;
    std::size_t n = 0;
    for (const std::size_t lines : lines_per_record)
      {
        if (newlines < lines)
          break;
        newlines -= lines;
        ++n;
      }
    return n;
  }
} // namespace

TEST(ResultsStore, RoundTripIsExact)
{
  const auto       records = sample_records();
  TemporaryFolder  folder("roundtrip");
  ResultsStore     store(folder.path.string(), false);
  for (const auto &r : records)
    store.append(r);
  const auto back = ResultsStore::read(folder.path.string());
  ASSERT_EQ(back.size(), records.size());
  for (std::size_t i = 0; i < records.size(); ++i)
    expect_same(records[i], back[i]);
}

TEST(ResultsStore, SummaryFileCutAtEveryByte)
{
  const auto records             = sample_records();
  const auto [eigen, summary]    = written(records);
  const std::vector<std::size_t> one_line(records.size(), 1);
  TemporaryFolder                folder("cut_summary");
  for (std::size_t cut = 0; cut <= summary.size(); ++cut)
    {
      spit(folder.path / "eigenvalues.csv", eigen);
      spit(folder.path / "realisations.csv", summary.substr(0, cut));
      const auto        back = ResultsStore::read(folder.path.string());
      const std::size_t n    = complete_before(summary, cut, 1, one_line);
      ASSERT_EQ(back.size(), n) << "realisations.csv cut after " << cut << " bytes";
      for (std::size_t i = 0; i < n; ++i)
        expect_same(records[i], back[i]);
    }
}

TEST(ResultsStore, EigenvalueFileCutAtEveryByte)
{
  // The store writes eigenvalues before the summary line, so a cut in
  // eigenvalues.csv with a complete summary does not happen in a crash; the
  // reader must still refuse the short record rather than report fewer values.
  const auto records          = sample_records();
  const auto [eigen, summary] = written(records);
  std::vector<std::size_t> lines;
  for (const auto &r : records)
    lines.push_back(r.eigenvalues.size());
  TemporaryFolder folder("cut_eigen");
  for (std::size_t cut = 0; cut <= eigen.size(); ++cut)
    {
      spit(folder.path / "eigenvalues.csv", eigen.substr(0, cut));
      spit(folder.path / "realisations.csv", summary);
      const auto        back = ResultsStore::read(folder.path.string());
      const std::size_t n    = complete_before(eigen, cut, 1, lines);
      ASSERT_EQ(back.size(), n) << "eigenvalues.csv cut after " << cut << " bytes";
      for (std::size_t i = 0; i < n; ++i)
        expect_same(records[i], back[i]);
    }
}

TEST(ResultsStore, ResumeAfterTornWriteKeepsOnlyTheRewrittenRecord)
{
  // A crash while the last record was being written, at every cut of its
  // eigenvalue lines and of its summary line, then the resumed run appends
  // the same record again: the reader must return it exactly once, intact.
  const auto records          = sample_records();
  const auto [eigen, summary] = written(records);
  const auto [eigen_head, summary_head] =
    written(std::vector<RealisationRecord>(records.begin(), records.end() - 1));
  const std::string eigen_tail   = eigen.substr(eigen_head.size());
  const std::string summary_tail = summary.substr(summary_head.size());
  TemporaryFolder   folder("resume");
  // Cuts: inside the eigenvalue lines (no summary yet), then inside the summary line.
  for (std::size_t cut = 0; cut < eigen_tail.size() + summary_tail.size(); ++cut)
    {
      const bool in_eigen = cut < eigen_tail.size();
      spit(folder.path / "eigenvalues.csv",
           eigen_head + (in_eigen ? eigen_tail.substr(0, cut) : eigen_tail));
      spit(folder.path / "realisations.csv",
           summary_head + (in_eigen ? "" : summary_tail.substr(0, cut - eigen_tail.size())));
      {
        const ResultsStore store(folder.path.string(), true);
        store.append(records.back());
      }
      const auto back = ResultsStore::read(folder.path.string());
      ASSERT_EQ(back.size(), records.size()) << "torn write cut after " << cut << " bytes";
      for (std::size_t i = 0; i < records.size(); ++i)
        expect_same(records[i], back[i]);
    }
}

TEST(ResultsStore, MalformedLinesAreSkipped)
{
  // Garbage in a field (not a number) makes that line unusable; the record
  // it belongs to is then incomplete and dropped, the others survive.
  const auto records          = sample_records();
  const auto [eigen, summary] = written(records);
  TemporaryFolder folder("garbage");
  std::string     bad_summary = summary;
  // Break the first data line's n_eigenvalues field (third field).
  const std::size_t line_start = bad_summary.find('\n') + 1;
  std::size_t       field      = line_start;
  for (int i = 0; i < 2; ++i)
    field = bad_summary.find(',', field) + 1;
  bad_summary.replace(field, 1, "x");
  spit(folder.path / "eigenvalues.csv", eigen);
  spit(folder.path / "realisations.csv", bad_summary);
  const auto back = ResultsStore::read(folder.path.string());
  ASSERT_EQ(back.size(), records.size() - 1);
  for (std::size_t i = 1; i < records.size(); ++i)
    expect_same(records[i], back[i - 1]);
}

TEST(ResultsStore, MissingFolderReadsAsEmpty)
{
  EXPECT_TRUE(ResultsStore::read("/nonexistent/alloyspec/folder").empty());
}
