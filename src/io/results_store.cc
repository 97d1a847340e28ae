#include <alloyspec/core/errors.h>
#include <alloyspec/io/record_reader.h>
#include <alloyspec/io/results_store.h>
#include <alloyspec/core/format.h>

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
    /**
     * A failed write into the output folder (a full disk, a folder made
     * read-only, a file replaced by a folder) is the user's to fix; the stored
     * records stay readable, so a resume continues from them.
     */
    const char *const write_advice =
      " (make room or fix the folder, then continue with --resume; every complete record "
      "stored so far is kept)";

    /** Appends @p text to @p path and forces it to disk before returning. */
    void append_durably(const std::string &path, const std::string &header, const std::string &text)
    {
      const int fd = ::open(path.c_str(), O_RDWR | O_CREAT | O_APPEND, 0644);
      if (fd < 0)
        throw InputError("output folder: cannot open '" + path + "' for appending: " +
                         std::strerror(errno) + write_advice);
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
              const int error = errno;
              ::close(fd);
              throw InputError("output folder: cannot write '" + path + "': " +
                               std::strerror(error) + write_advice);
            }
          written += static_cast<std::size_t>(n);
        }
      if (::fsync(fd) != 0)
        {
          const int error = errno;
          ::close(fd);
          throw InputError("output folder: cannot write '" + path + "' to disk: " +
                           std::strerror(error) + write_advice);
        }
      ::close(fd);
    }

  } // namespace

  std::string RealisationRecord::eigenvalue_lines() const
  {
    std::string out;
    for (std::size_t i = 0; i < eigenvalues.size(); ++i)
      {
        out += std::to_string(realisation) + "," + boundary + "," + std::to_string(i) + "," +
               csv_number(eigenvalues[i]) + "," + csv_number(residuals[i]) + "," +
               (i < errors.size() ? csv_number(errors[i]) : std::string("nan")) + "," +
               (i < inverse_participation_ratios.size() ? csv_number(inverse_participation_ratios[i]) : std::string("nan")) + "," +
               (i < central_weights.size() ? csv_number(central_weights[i]) : std::string("nan")) + "," +
               (i < enclosure_lower.size() ? csv_number(enclosure_lower[i]) : std::string("nan")) + "," +
               (i < enclosure_upper.size() ? csv_number(enclosure_upper[i]) : std::string("nan")) + "\n";
      }
    return out;
  }

  std::string RealisationRecord::summary_line() const
  {
    return std::to_string(realisation) + "," + boundary + "," + std::to_string(eigenvalues.size()) +
           "," + csv_number(complete_up_to) + "," +
           (verified_by == "enclosure" ? std::string("nan") : std::to_string(inertia_count)) + "," +
           csv_number(potential_min) + "," + csv_number(potential_max) + "," +
           csv_number(solve_seconds) + "," + std::to_string(attempts) + "," +
           csv_number(log_weight) + "," + verified_by + "\n";
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
    if (!resume)
      refuse_earlier_study();
    created_ = !fs::exists(directory_, error);
    fs::create_directories(directory_, error);
    if (error)
      throw InputError("option '--output': cannot create folder '" + directory_ +
                       "': " + error.message());
  }

  std::string ResultsStore::stored_parameters_path(const std::string &directory)
  {
    std::error_code error;
    for (const char *name : {parameters_file, legacy_parameters_file})
      if (const auto file = std::filesystem::path(directory) / name;
          std::filesystem::is_regular_file(file, error))
        return file.string();
    return {};
  }

  ResultsStore ResultsStore::attach(std::string directory)
  {
    ResultsStore store;
    store.directory_ = std::move(directory);
    return store;
  }

  bool ResultsStore::holds_records(const std::string &directory)
  {
    std::error_code error;
    namespace fs = std::filesystem;
    return fs::exists(fs::path(directory) / "realisations.csv", error) ||
           fs::exists(fs::path(directory) / "eigenvalues.csv", error);
  }

  std::string ResultsStore::read_stored_parameters(const std::string &directory)
  {
    namespace fs = std::filesystem;
    // Folders written by earlier versions hold the legacy name.
    const std::string file = stored_parameters_path(directory);
    std::error_code   error;
    if (file.empty())
      throw InputError("study folder '" + directory + "': the stored parameter file '" +
                       (fs::path(directory) / parameters_file).string() +
                       "' is missing, so the model of the stored records is unknown (restore "
                       "the file, or run the study again into a new folder)");
    if (!fs::is_regular_file(file, error))
      throw InputError("study folder '" + directory + "': '" + file + "' is not a file");
    std::ifstream in(file, std::ios::binary);
    std::ostringstream text;
    if (in)
      text << in.rdbuf();
    if (!in || in.bad())
      throw InputError("study folder '" + directory + "': cannot read '" + file + "'");
    bool any_entry = false;
    std::istringstream lines(text.str());
    for (std::string line; std::getline(lines, line);)
      {
        const auto first = line.find_first_not_of(" \t\r");
        any_entry = any_entry || (first != std::string::npos && line.compare(first, 4, "set ") == 0);
      }
    if (!any_entry)
      throw InputError("study folder '" + directory + "': the stored parameter file '" + file +
                       "' holds no parameters (it is empty or damaged), so the model of the "
                       "stored records is unknown (restore the file, or run the study again "
                       "into a new folder)");
    return text.str();
  }

  void ResultsStore::refuse_earlier_study() const
  {
    std::error_code error;
    namespace fs = std::filesystem;
    if (fs::exists(path("realisations.csv"), error) || fs::exists(path("eigenvalues.csv"), error) ||
        fs::exists(path("run.json"), error))
      throw InputError("option '--output': folder '" + directory_ +
                       "' already holds the results of an earlier study; nothing was changed. "
                       "Choose a new folder, or add --resume to continue that study");
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
    auto fail = [&](const std::string &what, int error) {
      ::unlink(temporary.c_str());
      throw InputError("output folder: cannot write '" + what + "': " + std::strerror(error) +
                       " (make room or fix the folder's permissions; files written before are "
                       "unchanged)");
    };
    const int fd = ::open(temporary.c_str(), O_WRONLY | O_CREAT | O_TRUNC | O_CLOEXEC, 0644);
    if (fd < 0)
      fail(temporary, errno);
    std::size_t written = 0;
    while (written < content.size())
      {
        const ssize_t n = ::write(fd, content.data() + written, content.size() - written);
        if (n < 0 && errno == EINTR)
          continue;
        if (n < 0)
          {
            const int error = errno;
            ::close(fd);
            fail(temporary, error);
          }
        written += static_cast<std::size_t>(n);
      }
    if (::fsync(fd) != 0)
      {
        const int error = errno;
        ::close(fd);
        fail(temporary, error);
      }
    ::close(fd);
    if (::rename(temporary.c_str(), target.c_str()) != 0)
      fail(target, errno);
  }

  std::vector<std::string> ResultsStore::prepare_resume() const
  {
    StoredRecords stored = read_stored_records(directory_);
    // A folder of an earlier version has fewer columns: its records are
    // written again in this version's columns (atomically, the earlier
    // values unchanged, the new columns missing or "inertia", which is how
    // every earlier list was checked), so that the appended lines match.
    bool earlier = false;
    for (const auto &[file, header] : {std::pair<const char *, const char *>{"eigenvalues.csv", eigenvalue_header},
                                       {"realisations.csv", summary_header}})
      {
        std::ifstream in(path(file));
        std::string   first;
        if (in && std::getline(in, first) && first != header)
          earlier = true;
      }
    if (earlier)
      {
        std::string eigen = std::string(eigenvalue_header) + "\n",
                    summary = std::string(summary_header) + "\n";
        for (const RealisationRecord &r : stored.records)
          {
            eigen += r.eigenvalue_lines();
            summary += r.summary_line();
          }
        write_file("eigenvalues.csv", eigen);
        write_file("realisations.csv", summary);
        stored.warnings.push_back("the records were written by an earlier version; they are now "
                                  "stored with this version's columns (values unchanged)");
        return stored.warnings;
      }
    // Cut the remains of an interrupted write, so that the next record
    // follows the last complete one directly (the reader accepts remains only
    // at the end of a file).
    for (const auto &[file, bytes] : {std::pair<const char *, std::uint64_t>{"eigenvalues.csv",
                                                                             stored.eigenvalue_bytes},
                                      {"realisations.csv", stored.summary_bytes}})
      {
        const std::string p = path(file);
        std::error_code   error;
        if (!std::filesystem::exists(p, error))
          continue;
        if (std::filesystem::file_size(p, error) == bytes)
          continue;
        if (::truncate(p.c_str(), static_cast<off_t>(bytes)) != 0)
          throw InputError("option '--resume': cannot cut the remains of an interrupted write "
                           "from '" + p + "': " + std::strerror(errno));
      }
    return stored.warnings;
  }
} // namespace alloyspec
