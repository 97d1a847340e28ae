// The record reader (record_reader.h) on torn and damaged files. A crash
// (SIGKILL, power loss, a full disk) can cut either CSV file at any byte, but
// the store fsyncs a round's eigenvalue lines before their summary lines, so a
// crash leaves remains only at the ends of the files: those are dropped with a
// warning. Every other damage is refused with an InputError naming the file
// and line, never read as fewer or different records. Every cut position is
// tried, so no byte offset is special.
#include <alloyspec/core/errors.h>
#include <alloyspec/io/record_reader.h>
#include <alloyspec/io/results_store.h>

#include <gtest/gtest.h>

#include <cmath>
#include <filesystem>
#include <fstream>
#include <sstream>
#include <string>
#include <vector>

#include <unistd.h>

namespace
{
  using alloyspec::InputError;
  using alloyspec::read_stored_records;
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

  /** The InputError message of reading @p folder, or "" if it was accepted. */
  std::string refusal(const fs::path &folder)
  {
    try
      {
        (void)read_stored_records(folder.string());
      }
    catch (const InputError &e)
      {
        return e.what();
      }
    return {};
  }
} // namespace

TEST(ResultsStore, RoundTripIsExact)
{
  const auto      records = sample_records();
  TemporaryFolder folder("roundtrip");
  ResultsStore    store(folder.path.string(), false);
  for (const auto &r : records)
    store.append(r);
  const auto back = read_stored_records(folder.path.string());
  EXPECT_TRUE(back.warnings.empty());
  ASSERT_EQ(back.records.size(), records.size());
  for (std::size_t i = 0; i < records.size(); ++i)
    expect_same(records[i], back.records[i]);
}

TEST(ResultsStore, SummaryFileCutAtEveryByte)
{
  // What a crash during the summary append leaves: all eigenvalue lines, the
  // summary cut anywhere. The complete records are read, the rest is dropped
  // with a warning.
  const auto records             = sample_records();
  const auto [eigen, summary]    = written(records);
  const std::vector<std::size_t> one_line(records.size(), 1);
  TemporaryFolder                folder("cut_summary");
  for (std::size_t cut = 0; cut <= summary.size(); ++cut)
    {
      spit(folder.path / "eigenvalues.csv", eigen);
      spit(folder.path / "realisations.csv", summary.substr(0, cut));
      const auto        back = read_stored_records(folder.path.string());
      const std::size_t n    = complete_before(summary, cut, 1, one_line);
      ASSERT_EQ(back.records.size(), n) << "realisations.csv cut after " << cut << " bytes";
      EXPECT_EQ(back.warnings.empty(), cut == summary.size()) << cut;
      for (std::size_t i = 0; i < n; ++i)
        expect_same(records[i], back.records[i]);
    }
}

TEST(ResultsStore, EigenvalueFileCutUnderCompleteSummaryIsRefused)
{
  // The store writes eigenvalues before the summary line, so a cut in
  // eigenvalues.csv under a complete summary is damage, not a crash (the
  // issue's "cut at 60 %" gave tables from fewer realisations): refused,
  // naming realisations.csv and the line whose count is not met.
  const auto records          = sample_records();
  const auto [eigen, summary] = written(records);
  TemporaryFolder folder("cut_eigen");
  spit(folder.path / "realisations.csv", summary);
  for (std::size_t cut = 0; cut < eigen.size(); ++cut)
    {
      spit(folder.path / "eigenvalues.csv", eigen.substr(0, cut));
      const std::string message = refusal(folder.path);
      ASSERT_NE(message, "") << "eigenvalues.csv cut after " << cut << " bytes was accepted";
      EXPECT_NE(message.find("line"), std::string::npos) << message;
    }
}

TEST(ResultsStore, ResumeAfterTornWriteKeepsOnlyTheRewrittenRecord)
{
  // A crash while the last record was being written, at every cut of its
  // eigenvalue lines and of its summary line; the resume cuts the remains and
  // appends the same record again: it is read exactly once, intact, with no
  // warning left.
  const auto records          = sample_records();
  const auto [eigen, summary] = written(records);
  const auto [eigen_head, summary_head] =
    written(std::vector<RealisationRecord>(records.begin(), records.end() - 1));
  const std::string eigen_tail   = eigen.substr(eigen_head.size());
  const std::string summary_tail = summary.substr(summary_head.size());
  TemporaryFolder   folder("resume");
  for (std::size_t cut = 0; cut < eigen_tail.size() + summary_tail.size(); ++cut)
    {
      const bool in_eigen = cut < eigen_tail.size();
      spit(folder.path / "eigenvalues.csv",
           eigen_head + (in_eigen ? eigen_tail.substr(0, cut) : eigen_tail));
      spit(folder.path / "realisations.csv",
           summary_head + (in_eigen ? "" : summary_tail.substr(0, cut - eigen_tail.size())));
      {
        const ResultsStore store(folder.path.string(), true);
        (void)store.prepare_resume();
        store.append(records.back());
      }
      const auto back = read_stored_records(folder.path.string());
      ASSERT_EQ(back.records.size(), records.size()) << "torn write cut after " << cut << " bytes";
      EXPECT_TRUE(back.warnings.empty()) << cut << ": " << back.warnings.front();
      for (std::size_t i = 0; i < records.size(); ++i)
        expect_same(records[i], back.records[i]);
    }
}

TEST(ResultsStore, DamageIsRefusedWithFileAndLine)
{
  const auto records          = sample_records();
  const auto [eigen, summary] = written(records);
  // Line k (1-based) of a text, and the text with line k replaced or removed.
  auto lines_of = [](const std::string &text) {
    std::vector<std::string> lines;
    std::istringstream       in(text);
    for (std::string l; std::getline(in, l);)
      lines.push_back(l);
    return lines;
  };
  auto join = [](const std::vector<std::string> &lines) {
    std::string s;
    for (const auto &l : lines)
      s += l + "\n";
    return s;
  };
  auto with_field = [&](const std::string &text, std::size_t line, std::size_t field,
                        const std::string &value) {
    auto lines = lines_of(text);
    std::vector<std::string> f;
    std::stringstream        in(lines[line - 1]);
    for (std::string x; std::getline(in, x, ',');)
      f.push_back(x);
    f[field] = value;
    std::string joined;
    for (std::size_t i = 0; i < f.size(); ++i)
      joined += (i ? "," : "") + f[i];
    lines[line - 1] = joined;
    return join(lines);
  };
  auto without_line = [&](const std::string &text, std::size_t line) {
    auto lines = lines_of(text);
    lines.erase(lines.begin() + static_cast<long>(line) - 1);
    return join(lines);
  };
  std::string crlf;
  for (const char c : eigen)
    crlf += c == '\n' ? std::string("\r\n") : std::string(1, c);

  struct Case
  {
    std::string what, eigen, summary, must_name;
  };
  const std::vector<Case> cases = {
    {"a nan eigenvalue", with_field(eigen, 3, 3, "nan"), summary, "eigenvalues.csv' line 3"},
    {"an inf eigenvalue", with_field(eigen, 4, 3, "inf"), summary, "eigenvalues.csv' line 4"},
    {"an eigenvalue of -1e300", with_field(eigen, 2, 3, "-1e300"), summary, "eigenvalues.csv' line 2"},
    {"eigenvalues out of order", with_field(eigen, 3, 3, "-0.4"), summary, "eigenvalues.csv' line 3"},
    {"a nan residual", with_field(eigen, 5, 4, "nan"), summary, "eigenvalues.csv' line 5"},
    {"a deleted eigenvalue line", without_line(eigen, 6), summary, "eigenvalues.csv' line 6"},
    {"a deleted summary line", eigen, without_line(summary, 2), "eigenvalues.csv' line 2"},
    {"garbage in n_eigenvalues", eigen, with_field(summary, 3, 2, "x"), "realisations.csv' line 3"},
    {"a count that disagrees", eigen, with_field(summary, 2, 2, "2"), "eigenvalues.csv' line 4"},
    {"a record stored twice", eigen + eigen.substr(eigen.find('\n') + 1),
     summary + summary.substr(summary.find('\n') + 1), "stored a second time"},
    {"Windows line ends", crlf, summary, "eigenvalues.csv' line 1"},
    {"an unknown boundary", with_field(eigen, 2, 1, "robin"), summary, "eigenvalues.csv' line 2"},
    {"a missing eigenvalues.csv", "<absent>", summary, "is missing"},
    {"an empty eigenvalues.csv", "", summary, "realisations.csv' line 2"},
    {"binary garbage", std::string("\x7f" "ELF\x01\x02\n\x00\xff garbage\n", 20), summary,
     "eigenvalues.csv' line 1"},
  };
  TemporaryFolder folder("damage");
  for (const auto &c : cases)
    {
      fs::remove(folder.path / "eigenvalues.csv");
      if (c.eigen != "<absent>")
        spit(folder.path / "eigenvalues.csv", c.eigen);
      spit(folder.path / "realisations.csv", c.summary);
      const std::string message = refusal(folder.path);
      EXPECT_NE(message.find(c.must_name), std::string::npos)
        << c.what << ": '" << message << "' does not contain '" << c.must_name << "'";
    }
}

TEST(ResultsStore, MissingFolderReadsAsEmpty)
{
  const auto back = read_stored_records("/nonexistent/alloyspec/folder");
  EXPECT_TRUE(back.records.empty());
  EXPECT_TRUE(back.warnings.empty());
}

TEST(ResultsStore, StoredParameterFileMustHoldParameters)
{
  TemporaryFolder folder("parameters");
  EXPECT_THROW(ResultsStore::read_stored_parameters(folder.path.string()), InputError); // missing
  spit(folder.path / ResultsStore::parameters_file, "");
  EXPECT_THROW(ResultsStore::read_stored_parameters(folder.path.string()), InputError); // empty
  spit(folder.path / ResultsStore::parameters_file, "# only a comment\nsubsection lattice\nend\n");
  EXPECT_THROW(ResultsStore::read_stored_parameters(folder.path.string()), InputError);
  spit(folder.path / ResultsStore::parameters_file, "subsection lattice\n  set cells = 3\nend\n");
  EXPECT_NO_THROW(ResultsStore::read_stored_parameters(folder.path.string()));
}

TEST(ResultsStore, StoredParameterFileUnderEitherName)
{
  // Earlier versions named the file parameters.prm; it is still read, and the
  // current name wins when both are present.
  TemporaryFolder folder("parameter_names");
  const std::string dir = folder.path.string();
  EXPECT_EQ(ResultsStore::stored_parameters_path(dir), "");
  spit(folder.path / ResultsStore::legacy_parameters_file,
       "subsection lattice\n  set cells = 3\nend\n");
  EXPECT_EQ(ResultsStore::stored_parameters_path(dir),
            (folder.path / ResultsStore::legacy_parameters_file).string());
  EXPECT_NE(ResultsStore::read_stored_parameters(dir).find("set cells = 3"), std::string::npos);
  spit(folder.path / ResultsStore::parameters_file, "subsection lattice\n  set cells = 4\nend\n");
  EXPECT_EQ(ResultsStore::stored_parameters_path(dir),
            (folder.path / ResultsStore::parameters_file).string());
  EXPECT_NE(ResultsStore::read_stored_parameters(dir).find("set cells = 4"), std::string::npos);
  EXPECT_STREQ(ResultsStore::parameters_file, "as_run.prm");
}

TEST(ResultsStore, EnclosuresAndVerificationRoundTrip)
{
  // An enclosure-verified list: no inertia count was made, so the count is
  // written missing and read back as 0, never as a claimed count.
  auto records = sample_records();
  for (auto &r : records)
    {
      r.verified_by = r.boundary == "neumann" ? "enclosure" : "inertia";
      for (const double x : r.eigenvalues)
        {
          r.enclosure_lower.push_back(x - 1e-11);
          r.enclosure_upper.push_back(x + 3e-12);
        }
      if (r.verified_by == "enclosure")
        r.inertia_count = 0;
    }
  TemporaryFolder folder("enclosures");
  ResultsStore    store(folder.path.string(), false);
  for (const auto &r : records)
    store.append(r);
  const std::string summary = slurp(folder.path / "realisations.csv");
  EXPECT_NE(summary.find(",nan,"), std::string::npos); // the missing count
  const auto back = read_stored_records(folder.path.string());
  ASSERT_EQ(back.records.size(), records.size());
  for (std::size_t i = 0; i < records.size(); ++i)
    {
      expect_same(records[i], back.records[i]);
      EXPECT_EQ(records[i].verified_by, back.records[i].verified_by);
      EXPECT_EQ(records[i].enclosure_lower, back.records[i].enclosure_lower);
      EXPECT_EQ(records[i].enclosure_upper, back.records[i].enclosure_upper);
    }
  // A missing count on an inertia-verified line is damage, not an absent count.
  std::string damaged = summary;
  const std::size_t at = damaged.find(",inertia\n");
  ASSERT_NE(at, std::string::npos);
  const std::size_t line_start = damaged.rfind('\n', at) + 1;
  std::string       line = damaged.substr(line_start, at - line_start);
  std::vector<std::string> f;
  for (std::size_t s = 0, c; ; s = c + 1)
    {
      c = line.find(',', s);
      f.push_back(line.substr(s, c - s));
      if (c == std::string::npos)
        break;
    }
  f[4] = "nan";
  std::string rebuilt;
  for (std::size_t k = 0; k < f.size(); ++k)
    rebuilt += (k ? "," : "") + f[k];
  damaged.replace(line_start, at - line_start, rebuilt);
  spit(folder.path / "realisations.csv", damaged);
  EXPECT_NE(refusal(folder.path).find("inertia_count"), std::string::npos);
}

TEST(ResultsStore, FoldersWithoutEnclosureColumnsReadAsInertiaChecked)
{
  TemporaryFolder folder("earlier");
  spit(folder.path / "eigenvalues.csv",
       "realisation,boundary,index,eigenvalue_reduced,residual,error_reduced,ipr,central_weight\n"
       "0,dirichlet,0,1.5,1e-13,nan,0.01,0.02\n");
  spit(folder.path / "realisations.csv",
       "realisation,boundary,n_eigenvalues,complete_up_to_reduced,inertia_count,"
       "potential_min_reduced,potential_max_reduced,solve_seconds,attempts,log_weight\n"
       "0,dirichlet,1,2,1,0,1,0.5,1,0\n");
  const auto back = read_stored_records(folder.path.string());
  ASSERT_EQ(back.records.size(), 1u);
  EXPECT_EQ(back.records[0].verified_by, "inertia");
  EXPECT_EQ(back.records[0].inertia_count, 1u);
  ASSERT_EQ(back.records[0].enclosure_lower.size(), 1u);
  EXPECT_TRUE(std::isnan(back.records[0].enclosure_lower[0]));
}
