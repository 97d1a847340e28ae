#include <alloyspec/core/errors.h>
#include <alloyspec/io/results_store.h>

#include <cerrno>
#include <cmath>
#include <cstdio>
#include <cstring>
#include <filesystem>
#include <fstream>
#include <iomanip>
#include <map>
#include <sstream>
#include <stdexcept>

#include <fcntl.h>
#include <unistd.h>

namespace alloyspec
{
  namespace
  {
    std::string full_precision(double x)
    {
      char buffer[40];
      std::snprintf(buffer, sizeof buffer, "%.17g", x);
      return buffer;
    }

    /** Appends @p text to @p path and forces it to disk before returning. */
    void append_durably(const std::string &path, const std::string &header, const std::string &text)
    {
      const int fd = ::open(path.c_str(), O_RDWR | O_CREAT | O_APPEND, 0644);
      if (fd < 0)
        throw std::runtime_error("cannot open " + path + " for appending: " + std::strerror(errno));
      std::string data;
      const off_t size = ::lseek(fd, 0, SEEK_END);
      if (size == 0)
        data = header + "\n";
      else
        {
          // A crash may have left a torn last line: end it, so that the reader
          // drops that line alone instead of gluing it to the next record.
          char last = '\n';
          if (::pread(fd, &last, 1, size - 1) == 1 && last != '\n')
            data = "\n";
        }
      data += text;
      std::size_t written = 0;
      while (written < data.size())
        {
          const ssize_t n = ::write(fd, data.data() + written, data.size() - written);
          if (n < 0)
            {
              if (errno == EINTR)
                continue;
              ::close(fd);
              throw std::runtime_error("cannot write " + path + ": " + std::strerror(errno));
            }
          written += static_cast<std::size_t>(n);
        }
      ::fsync(fd);
      ::close(fd);
    }

    std::vector<std::string> split(const std::string &line, char separator)
    {
      std::vector<std::string> fields;
      std::string              field;
      std::istringstream       in(line);
      while (std::getline(in, field, separator))
        fields.push_back(field);
      if (!line.empty() && line.back() == separator)
        fields.emplace_back();
      return fields;
    }

    bool parse_double(const std::string &text, double &value)
    {
      if (text.empty())
        return false;
      char *end = nullptr;
      value     = std::strtod(text.c_str(), &end);
      return end == text.c_str() + text.size();
    }
  } // namespace

  std::string RealisationRecord::eigenvalue_lines() const
  {
    std::string out;
    for (std::size_t i = 0; i < eigenvalues.size(); ++i)
      {
        out += std::to_string(realisation) + "," + boundary + "," + std::to_string(i) + "," +
               full_precision(eigenvalues[i]) + "," + full_precision(residuals[i]) + "," +
               (i < errors.size() ? full_precision(errors[i]) : std::string("nan")) + "," +
               (i < inverse_participation_ratios.size() ? full_precision(inverse_participation_ratios[i]) : std::string("nan")) + "," +
               (i < central_weights.size() ? full_precision(central_weights[i]) : std::string("nan")) + "\n";
      }
    return out;
  }

  std::string RealisationRecord::summary_line() const
  {
    return std::to_string(realisation) + "," + boundary + "," + std::to_string(eigenvalues.size()) +
           "," + full_precision(complete_up_to) + "," + std::to_string(inertia_count) + "," +
           full_precision(potential_min) + "," + full_precision(potential_max) + "," +
           full_precision(solve_seconds) + "," + std::to_string(attempts) + "," +
           full_precision(log_weight) + "\n";
  }

  ResultsStore::ResultsStore(std::string directory, bool resume)
    : directory_(std::move(directory))
  {
    namespace fs = std::filesystem;
    std::error_code error;
    if (fs::exists(directory_, error) && !fs::is_directory(directory_, error))
      throw InputError("option '--output': '" + directory_ +
                       "' exists and is not a folder (allowed: a new or empty folder, or an "
                       "earlier study's folder with --resume)");
    const bool has_results = fs::exists(path("realisations.csv"), error) ||
                             fs::exists(path("eigenvalues.csv"), error) ||
                             fs::exists(path("run.json"), error);
    if (has_results && !resume)
      throw InputError("option '--output': folder '" + directory_ +
                       "' already holds the results of an earlier study; nothing was changed. "
                       "Choose a new folder, or add --resume to continue that study");
    fs::create_directories(directory_, error);
    if (error)
      throw InputError("option '--output': cannot create folder '" + directory_ +
                       "': " + error.message());
  }

  std::string ResultsStore::path(const std::string &file) const
  {
    return (std::filesystem::path(directory_) / file).string();
  }

  void ResultsStore::append(const RealisationRecord &record) const
  {
    append_text(record.eigenvalue_lines(), record.summary_line());
  }

  void ResultsStore::append_text(const std::string &eigenvalue_lines,
                                 const std::string &summary_lines) const
  {
    // Eigenvalues first: a record becomes visible only with its summary line.
    append_durably(path("eigenvalues.csv"), eigenvalue_header, eigenvalue_lines);
    append_durably(path("realisations.csv"), summary_header, summary_lines);
  }

  void ResultsStore::write_file(const std::string &file, const std::string &content) const
  {
    write_file_in(directory_, file, content);
  }

  void ResultsStore::write_file_in(const std::string &directory, const std::string &file,
                                   const std::string &content)
  {
    const std::string target    = (std::filesystem::path(directory) / file).string();
    const std::string temporary = target + ".partial";
    {
      std::ofstream out(temporary, std::ios::binary | std::ios::trunc);
      if (!out)
        throw std::runtime_error("cannot write " + temporary);
      out << content;
      out.flush();
      if (!out)
        throw std::runtime_error("cannot write " + temporary);
    }
    const int fd = ::open(temporary.c_str(), O_RDONLY);
    if (fd >= 0)
      {
        ::fsync(fd);
        ::close(fd);
      }
    std::filesystem::rename(temporary, target);
  }

  std::vector<RealisationRecord> ResultsStore::read(const std::string &directory)
  {
    namespace fs = std::filesystem;
    using Key    = std::pair<std::uint64_t, std::string>;
    std::map<Key, RealisationRecord> records;
    std::map<Key, std::size_t>       expected;
    std::vector<Key>                 order;

    std::ifstream summary(fs::path(directory) / "realisations.csv");
    std::string   line;
    std::getline(summary, line); // header
    // The header says whether lines carry the log weight: a line of a newer
    // folder torn after its ninth field must not pass as an older line.
    const std::size_t summary_fields = line.find("log_weight") != std::string::npos ? 10 : 9;
    while (std::getline(summary, line))
      {
        if (summary.eof())
          break; // no newline: a torn last line from a crash
        const auto f = split(line, ',');
        // 10 fields; folders written before tilted sampling have 9 (log weight 0).
        if (f.size() != summary_fields)
          continue;
        RealisationRecord r;
        if (f.size() == 10 && !parse_double(f[9], r.log_weight))
          continue;
        double            values[7];
        bool              ok = true;
        const int         numeric[] = {0, 2, 3, 4, 5, 6, 7};
        for (int i = 0; i < 7; ++i)
          ok = ok && parse_double(f[numeric[i]], values[i]);
        double attempts = 0;
        // The last field too: a line torn just after its last comma has all fields.
        if (!ok || !parse_double(f[8], attempts) || !std::isfinite(r.log_weight))
          continue;
        r.realisation    = static_cast<std::uint64_t>(values[0]);
        r.boundary       = f[1];
        r.complete_up_to = values[2];
        r.inertia_count  = static_cast<std::uint64_t>(values[3]);
        r.potential_min  = values[4];
        r.potential_max  = values[5];
        r.solve_seconds  = values[6];
        r.attempts       = static_cast<unsigned int>(std::atoi(f[8].c_str()));
        const Key key{r.realisation, r.boundary};
        expected[key] = static_cast<std::size_t>(values[1]);
        if (records.emplace(key, std::move(r)).second)
          order.push_back(key);
      }

    std::ifstream eigen(fs::path(directory) / "eigenvalues.csv");
    std::getline(eigen, line);
    while (std::getline(eigen, line))
      {
        if (eigen.eof())
          break;
        const auto f = split(line, ',');
        // 8 fields; older folders have 7 (no central weight) or 6 (no error either).
        if (f.size() < 6 || f.size() > 8)
          continue;
        const std::size_t ipr_field = f.size() == 8 ? 6 : f.size() - 1;
        double realisation = 0, index = 0, value = 0, residual = 0, ipr = 0, error = 0, weight = 0;
        if (!parse_double(f[0], realisation) || !parse_double(f[2], index) ||
            !parse_double(f[3], value) || !parse_double(f[4], residual))
          continue;
        if (!parse_double(f[ipr_field], ipr))
          ipr = std::nan("");
        if (f.size() < 7 || !parse_double(f[5], error))
          error = std::nan("");
        if (f.size() != 8 || !parse_double(f[7], weight))
          weight = std::nan("");
        const auto it = records.find(Key{static_cast<std::uint64_t>(realisation), f[1]});
        if (it == records.end())
          continue; // eigenvalues of a realisation whose summary never made it to disk
        auto &r = it->second;
        if (static_cast<std::size_t>(index) != r.eigenvalues.size())
          {
            // A realisation written twice (an interrupted attempt, then a
            // resumed one): keep the last complete run of indices.
            if (index == 0)
              {
                r.eigenvalues.clear();
                r.residuals.clear();
                r.inverse_participation_ratios.clear();
                r.errors.clear();
                r.central_weights.clear();
              }
            else
              continue;
          }
        r.eigenvalues.push_back(value);
        r.residuals.push_back(residual);
        r.inverse_participation_ratios.push_back(ipr);
        r.errors.push_back(error);
        r.central_weights.push_back(weight);
      }

    std::vector<RealisationRecord> result;
    result.reserve(order.size());
    for (const auto &key : order)
      if (records[key].eigenvalues.size() == expected[key])
        result.push_back(std::move(records[key]));
    return result;
  }
} // namespace alloyspec
