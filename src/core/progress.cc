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
    if (!enabled_)
      return;
    const double elapsed =
      std::chrono::duration<double>(std::chrono::steady_clock::now() - start_).count();
    const double rate = elapsed > 0 ? done / elapsed : 0.0;
    std::string  left = "estimating time left";
    if (done > 0 && rate > 0)
      left = "about " + format_duration((total_ - done) / rate) + " left";
    std::fprintf(stderr, "\r%s: %zu/%zu done, %.3g per s, %s   ", label_.c_str(), done, total_,
                 rate, left.c_str());
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
