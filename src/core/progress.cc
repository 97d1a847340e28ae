#include <alloyspec/core/progress.h>

#include <cmath>
#include <cstdio>

#include <unistd.h>

namespace alloyspec
{
  Progress::Progress(std::string label, std::size_t total, bool enabled)
    : label_(std::move(label))
    , total_(total)
    , enabled_(enabled)
    , start_(std::chrono::steady_clock::now())
  {}

  bool Progress::stderr_is_terminal() { return ::isatty(STDERR_FILENO) == 1; }

  std::string Progress::format_duration(double seconds)
  {
    char       buffer[64];
    const long s = std::lround(std::max(0.0, seconds));
    if (s >= 3600)
      std::snprintf(buffer, sizeof buffer, "%ld h %02ld min", s / 3600, (s % 3600) / 60);
    else if (s >= 60)
      std::snprintf(buffer, sizeof buffer, "%ld min %02ld s", s / 60, s % 60);
    else
      std::snprintf(buffer, sizeof buffer, "%ld s", s);
    return buffer;
  }

  void Progress::update(std::size_t done)
  {
    done_ = done;
    phase_.clear();
    print();
  }

  void Progress::phase(const std::string &what)
  {
    phase_ = what;
    print();
  }

  void Progress::print()
  {
    if (!enabled_)
      return;
    const double elapsed =
      std::chrono::duration<double>(std::chrono::steady_clock::now() - start_).count();
    std::string line = label_ + ": " + std::to_string(done_) + "/" + std::to_string(total_) +
                       " done, " + format_duration(elapsed) + " elapsed";
    if (done_ > 0 && elapsed > 0)
      {
        // Slow items read better as time per item than as a small rate.
        const double per_item = elapsed / double(done_);
        char         rate[64];
        if (per_item >= 1.0)
          std::snprintf(rate, sizeof rate, ", %s each", format_duration(per_item).c_str());
        else
          std::snprintf(rate, sizeof rate, ", %.3g per s", 1.0 / per_item);
        line += rate;
        if (done_ < total_)
          line += ", about " + format_duration(per_item * double(total_ - done_)) + " left";
      }
    if (!phase_.empty())
      line += "; " + phase_;
    std::fprintf(stderr, "\r%s\033[K", line.c_str());
    std::fflush(stderr);
    printed_ = true;
  }

  void Progress::finish()
  {
    if (enabled_ && printed_)
      {
        std::fprintf(stderr, "\n");
        std::fflush(stderr);
      }
    printed_ = false;
  }
} // namespace alloyspec
