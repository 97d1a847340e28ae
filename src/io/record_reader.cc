#include <alloyspec/core/errors.h>
#include <alloyspec/core/format.h>
#include <alloyspec/io/record_reader.h>

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <cstdlib>
#include <filesystem>
#include <fstream>
#include <iterator>
#include <map>
#include <set>
#include <sstream>

namespace alloyspec
{
  namespace
  {
    namespace fs = std::filesystem;

    /**
     * How far below the record's potential minimum an eigenvalue may lie and
     * still count as min q: the solver's relative residual tolerance is at
     * most 1e-8 (spectrum/tolerance), and an eigenvalue equal to min q (a
     * constant potential with Neumann faces) comes back within rounding of it.
     * Common practice, no source.
     */
    constexpr double below_potential_allowance = 1e-8;

    /** One line of a file, without its newline. */
    struct Line
    {
      std::string   text;
      std::size_t   number = 0; ///< 1-based
      std::uint64_t end    = 0; ///< byte offset just after its newline
    };

    /** A file's complete lines, and whether a torn (newline-less) last line was dropped. */
    struct File
    {
      std::string       name;
      std::string       path;
      bool              exists = false;
      std::vector<Line> lines;
      std::string       torn;
      bool              has_torn = false;
    };

    File read_file(const std::string &directory, const std::string &name)
    {
      File file;
      file.name = name;
      file.path = (fs::path(directory) / name).string();
      std::error_code error;
      const auto      status = fs::status(file.path, error);
      if (!fs::exists(status))
        return file;
      if (!fs::is_regular_file(status))
        throw InputError("stored records: '" + file.path +
                         "' is not a file (expected the study's " + name + ")");
      std::ifstream in(file.path, std::ios::binary);
      if (!in)
        throw InputError("stored records: cannot read '" + file.path + "'");
      const std::string content((std::istreambuf_iterator<char>(in)),
                                std::istreambuf_iterator<char>());
      if (in.bad())
        throw InputError("stored records: cannot read '" + file.path + "'");
      file.exists               = true;
      std::size_t start = 0, number = 1;
      while (start < content.size())
        {
          const std::size_t newline = content.find('\n', start);
          if (newline == std::string::npos)
            {
              file.has_torn = true;
              file.torn     = content.substr(start);
              break;
            }
          file.lines.push_back({content.substr(start, newline - start), number++, newline + 1});
          start = newline + 1;
        }
      return file;
    }

    /** @p text for a message: control bytes and bytes above 0x7e shown as \\xNN (a CR as \\r). */
    std::string printable(const std::string &text, std::size_t limit = 120)
    {
      std::string out;
      for (const char c : text.substr(0, limit))
        {
          const auto byte = static_cast<unsigned char>(c);
          if (c == '\r')
            out += "\\r";
          else if (byte < 0x20 || byte > 0x7e)
            {
              char hex[8];
              std::snprintf(hex, sizeof hex, "\\x%02x", byte);
              out += hex;
            }
          else
            out += c;
        }
      return text.size() > limit ? out + "..." : out;
    }

    [[noreturn]] void refuse(const File &file, const Line &line, const std::string &what)
    {
      throw InputError("stored records: '" + file.path + "' line " + std::to_string(line.number) +
                       ": " + what +
                       ". The folder is damaged; nothing was read from it (restore the file, "
                       "or run the study again into a new folder)");
    }

    std::vector<std::string> split(const std::string &line)
    {
      std::vector<std::string> fields;
      std::size_t              start = 0;
      while (true)
        {
          const std::size_t comma = line.find(',', start);
          fields.push_back(line.substr(start, comma - start));
          if (comma == std::string::npos)
            return fields;
          start = comma + 1;
        }
    }

    std::uint64_t whole_number(const File &file, const Line &line, const std::string &field,
                               const char *column)
    {
      if (field.empty() || field.size() > 19 ||
          field.find_first_not_of("0123456789") != std::string::npos)
        refuse(file, line, std::string("column '") + column + "' is '" + printable(field) +
                             "', not a whole number");
      return std::stoull(field);
    }

    double real_number(const File &file, const Line &line, const std::string &field,
                       const char *column, bool missing_allowed)
    {
      if (missing_allowed && (field == "nan" || field == "-nan"))
        return std::nan("");
      char        *end   = nullptr;
      const double value = field.empty() ? 0.0 : std::strtod(field.c_str(), &end);
      if (field.empty() || end != field.c_str() + field.size() || !std::isfinite(value) ||
          field.find_first_of(" \t\r") != std::string::npos)
        refuse(file, line, std::string("column '") + column + "' is '" + printable(field) +
                             "', not a finite number" +
                             (missing_allowed ? " or the missing marker 'nan'" : ""));
      return value;
    }

    std::string boundary_name(const File &file, const Line &line, const std::string &field)
    {
      if (field != "dirichlet" && field != "neumann" && field != "periodic")
        refuse(file, line, "column 'boundary' is '" + printable(field) +
                             "' (allowed: dirichlet, neumann, periodic)");
      return field;
    }

    /** The header; returns false (and sets nothing) when the file is only a torn header. */
    bool check_header(const File &file, const std::vector<std::string> &allowed,
                      std::size_t &fields, std::vector<std::string> &warnings)
    {
      if (file.lines.empty())
        {
          // Nothing but a header cut by a crash (or an empty file): no records.
          bool prefix = file.torn.empty();
          for (const auto &h : allowed)
            prefix = prefix || h.compare(0, file.torn.size(), file.torn) == 0;
          if (!prefix)
            throw InputError("stored records: '" + file.path + "' line 1: '" + printable(file.torn, 80) +
                             "' is not the header of " + file.name +
                             ". The folder is damaged; nothing was read from it");
          if (!file.torn.empty())
            warnings.push_back(file.path + ": a header cut short by an interrupted write; no "
                                           "records in it");
          return false;
        }
      const Line &header = file.lines.front();
      for (const auto &h : allowed)
        if (header.text == h)
          {
            fields = split(h).size();
            return true;
          }
      refuse(file, header, "the header is '" + printable(header.text) + "', expected '" +
                             allowed.front() + "'");
    }

    struct EigenLine
    {
      const Line   *line = nullptr;
      std::uint64_t realisation = 0, index = 0;
      std::string   boundary;
      double        value = 0, residual = 0, error = 0, ipr = 0, weight = 0;
      double        lower = 0, upper = 0;
    };
    std::string format_number(double x) { return short_number(x, 6); }
  } // namespace

  StoredRecords read_stored_records(const std::string &directory)
  {
    StoredRecords result;
    const File    eigen   = read_file(directory, "eigenvalues.csv");
    const File    summary = read_file(directory, "realisations.csv");

    // Summary lines.
    std::vector<RealisationRecord> records;
    std::vector<const Line *>      record_lines;
    std::vector<std::uint64_t>     expected; // eigenvalue count per summary line
    std::size_t                    fields = 0;
    // Earlier versions named the energy columns without their unit, and
    // folders written before tilted sampling have no log_weight column (weight 1).
    const std::string older_summary_10_reduced =
      "realisation,boundary,n_eigenvalues,complete_up_to_reduced,inertia_count,"
      "potential_min_reduced,potential_max_reduced,solve_seconds,attempts,log_weight";
    const std::string older_summary_10 =
      "realisation,boundary,n_eigenvalues,complete_up_to,inertia_count,potential_min,"
      "potential_max,solve_seconds,attempts,log_weight";
    const std::string older_summary_9 =
      "realisation,boundary,n_eigenvalues,complete_up_to,inertia_count,potential_min,"
      "potential_max,solve_seconds,attempts";
    if (summary.exists &&
        check_header(summary, {ResultsStore::summary_header, older_summary_10_reduced, older_summary_10,
                               older_summary_9},
                     fields, result.warnings))
      {
        result.summary_bytes = summary.lines.front().end;
        std::set<std::pair<std::uint64_t, std::string>> seen;
        for (std::size_t i = 1; i < summary.lines.size(); ++i)
          {
            const Line &line = summary.lines[i];
            const auto  f    = split(line.text);
            if (f.size() != fields)
              refuse(summary, line, std::to_string(f.size()) + " fields, expected " +
                                      std::to_string(fields));
            RealisationRecord r;
            r.realisation = whole_number(summary, line, f[0], "realisation");
            r.boundary    = boundary_name(summary, line, f[1]);
            const std::uint64_t n = whole_number(summary, line, f[2], "n_eigenvalues");
            r.complete_up_to = real_number(summary, line, f[3], "complete_up_to", false);
            // Folders of earlier versions hold inertia-checked lists only.
            if (fields == 11)
              {
                if (f[10] != "inertia" && f[10] != "enclosure")
                  refuse(summary, line, "column 'verified_by' is '" + printable(f[10]) +
                                          "' (allowed: inertia, enclosure)");
                r.verified_by = f[10];
              }
            // No count was made for an enclosure-verified list: its count is missing.
            if (r.verified_by == "enclosure" && f[4] == "nan")
              r.inertia_count = 0;
            else
              r.inertia_count = whole_number(summary, line, f[4], "inertia_count");
            r.potential_min  = real_number(summary, line, f[5], "potential_min", false);
            r.potential_max  = real_number(summary, line, f[6], "potential_max", false);
            r.solve_seconds  = real_number(summary, line, f[7], "solve_seconds", false);
            const std::uint64_t attempts = whole_number(summary, line, f[8], "attempts");
            if (r.potential_max < r.potential_min)
              refuse(summary, line, "potential_max is below potential_min");
            if (r.solve_seconds < 0)
              refuse(summary, line, "solve_seconds is negative");
            if (attempts > 1000)
              refuse(summary, line, "attempts is " + f[8] + " (at most a few are ever made)");
            r.attempts = static_cast<unsigned int>(attempts);
            if (fields >= 10)
              r.log_weight = real_number(summary, line, f[9], "log_weight", false);
            if (!seen.insert({r.realisation, r.boundary}).second)
              refuse(summary, line, "realisation " + f[0] + " (" + f[1] +
                                      ") is stored a second time");
            records.push_back(std::move(r));
            record_lines.push_back(&line);
            expected.push_back(n); // checked against the eigenvalue lines below
          }
        if (summary.has_torn)
          result.warnings.push_back(summary.path + ": line " +
                                    std::to_string(summary.lines.size() + 1) +
                                    " was cut short by an interrupted write and is ignored");
      }

    // Eigenvalue lines.
    std::vector<EigenLine> lines;
    if (eigen.exists)
      {
        const std::string older_8_reduced =
          "realisation,boundary,index,eigenvalue_reduced,residual,error_reduced,ipr,central_weight";
        const std::string older_6 = "realisation,boundary,index,eigenvalue,residual,ipr";
        const std::string older_7 = "realisation,boundary,index,eigenvalue,residual,error,ipr";
        const std::string older_8 =
          "realisation,boundary,index,eigenvalue,residual,error,ipr,central_weight";
        if (check_header(eigen, {ResultsStore::eigenvalue_header, older_8_reduced, older_8, older_7, older_6},
                         fields, result.warnings))
          {
            result.eigenvalue_bytes = eigen.lines.front().end;
            for (std::size_t i = 1; i < eigen.lines.size(); ++i)
              {
                const Line &line = eigen.lines[i];
                const auto  f    = split(line.text);
                if (f.size() != fields)
                  refuse(eigen, line, std::to_string(f.size()) + " fields, expected " +
                                        std::to_string(fields));
                EigenLine e;
                e.line        = &line;
                e.realisation = whole_number(eigen, line, f[0], "realisation");
                e.boundary    = boundary_name(eigen, line, f[1]);
                e.index       = whole_number(eigen, line, f[2], "index");
                e.value       = real_number(eigen, line, f[3], "eigenvalue", false);
                e.residual    = real_number(eigen, line, f[4], "residual", false);
                if (e.residual < 0)
                  refuse(eigen, line, "the residual is negative");
                const std::size_t ipr_field = fields == 6 ? 5 : 6;
                e.error  = fields >= 7 ? real_number(eigen, line, f[5], "error", true) : std::nan("");
                e.ipr    = real_number(eigen, line, f[ipr_field], "ipr", true);
                e.weight = fields >= 8 ? real_number(eigen, line, f[7], "central_weight", true) :
                                         std::nan("");
                e.lower  = fields == 10 ? real_number(eigen, line, f[8], "enclosure_lower", true) :
                                          std::nan("");
                e.upper  = fields == 10 ? real_number(eigen, line, f[9], "enclosure_upper", true) :
                                          std::nan("");
                if (e.lower > e.upper)
                  refuse(eigen, line, "enclosure_lower is above enclosure_upper");
                lines.push_back(std::move(e));
              }
          }
      }

    // Each summary line owns the eigenvalue lines just before the next
    // record's: the store writes them in the same order.
    std::size_t next = 0;
    for (std::size_t k = 0; k < records.size(); ++k)
      {
        RealisationRecord &r = records[k];
        const Line        &at = *record_lines[k];
        for (std::uint64_t i = 0; i < expected[k]; ++i, ++next)
          {
            if (next == lines.size())
              refuse(summary, at, "realisation " + std::to_string(r.realisation) + " (" +
                                    r.boundary + ") has " + std::to_string(expected[k]) +
                                    " eigenvalues, but '" + eigen.path + "' " +
                                    (eigen.exists ? "holds only " + std::to_string(i) + " of them" :
                                                    std::string("is missing")));
            const EigenLine &e = lines[next];
            if (e.realisation != r.realisation || e.boundary != r.boundary || e.index != i)
              refuse(eigen, *e.line, "expected eigenvalue " + std::to_string(i) +
                                       " of realisation " + std::to_string(r.realisation) + " (" +
                                       r.boundary + "), as line " + std::to_string(at.number) +
                                       " of realisations.csv says, but found index " +
                                       std::to_string(e.index) + " of realisation " +
                                       std::to_string(e.realisation) + " (" + e.boundary +
                                       "): a line is missing or out of place");
            const double scale = std::max({1.0, std::abs(r.potential_min), std::abs(r.potential_max)});
            if (e.value < r.potential_min - below_potential_allowance * scale)
              refuse(eigen, *e.line, "the eigenvalue lies below the realisation's potential "
                                     "minimum " + format_number(r.potential_min) +
                                     ", which no eigenvalue of -Laplacian + V can");
            if (i > 0 && e.value < r.eigenvalues.back())
              refuse(eigen, *e.line, "the eigenvalues are not in ascending order");
            r.eigenvalues.push_back(e.value);
            r.residuals.push_back(e.residual);
            r.errors.push_back(e.error);
            r.inverse_participation_ratios.push_back(e.ipr);
            r.central_weights.push_back(e.weight);
            r.enclosure_lower.push_back(e.lower);
            r.enclosure_upper.push_back(e.upper);
          }
        if (next > 0)
          result.eigenvalue_bytes = lines[next - 1].line->end;
        result.summary_bytes = at.end;
      }
    if (next < lines.size())
      result.warnings.push_back(eigen.path + ": " + std::to_string(lines.size() - next) +
                                " lines from line " + std::to_string(lines[next].line->number) +
                                " on belong to no summary line in realisations.csv: the remains "
                                "of an interrupted write, ignored");
    if (eigen.has_torn && !eigen.lines.empty())
      result.warnings.push_back(eigen.path + ": line " + std::to_string(eigen.lines.size() + 1) +
                                " was cut short by an interrupted write and is ignored");
    result.records = std::move(records);
    return result;
  }
} // namespace alloyspec
