// Machine ceilings for the solve's roofline (tests/benchmarks/bench.py):
// memory bandwidth from a STREAM-like triad and from a read-only sum, and the
// double-precision rate of a large matrix product (one BLAS thread). Prints
// one JSON object. The triad a = b + s c counts 24 bytes per element, the
// convention of McCalpin's STREAM (the write-allocate read of a is not
// counted); the best of several repetitions is reported, as STREAM does.
#include <algorithm>
#include <chrono>
#include <cstdio>
#include <cstdlib>
#include <vector>

extern "C" void dgemm_(const char *transa, const char *transb, const int *m, const int *n,
                       const int *k, const double *alpha, const double *a, const int *lda,
                       const double *b, const int *ldb, const double *beta, double *c,
                       const int *ldc);

namespace
{
  double seconds_since(const std::chrono::steady_clock::time_point start)
  {
    return std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count();
  }
} // namespace

int main(int argc, char **argv)
{
  // 2^24 doubles = 128 MiB per array, three arrays: twelve times a 32 MiB
  // last-level cache, so every pass streams from memory.
  const std::size_t n           = argc > 1 ? std::strtoull(argv[1], nullptr, 10) : (std::size_t(1) << 24);
  const int         repetitions = 10;
  std::vector<double> a(n, 0.0), b(n, 1.0), c(n, 2.0);
  const double        scalar = 3.0;

  double best_triad = 1e300, best_read = 1e300, checksum = 0;
  for (int r = 0; r < repetitions; ++r)
    {
      auto start = std::chrono::steady_clock::now();
      for (std::size_t i = 0; i < n; ++i)
        a[i] = b[i] + scalar * c[i];
      best_triad = std::min(best_triad, seconds_since(start));

      // Eight partial sums: one chain of dependent additions would measure
      // the adder's latency, not the memory.
      start = std::chrono::steady_clock::now();
      double sums[8] = {0, 0, 0, 0, 0, 0, 0, 0};
      for (std::size_t i = 0; i + 8 <= n; i += 8)
        for (std::size_t j = 0; j < 8; ++j)
          sums[j] += a[i + j];
      best_read = std::min(best_read, seconds_since(start));
      for (const double s : sums)
        checksum += s; // kept, so the loop cannot be dropped
    }

  // One-thread dgemm (the benchmark sets OPENBLAS_NUM_THREADS=1): 2 m^3 operations.
  const int           m = 1500;
  std::vector<double> x(std::size_t(m) * m, 1.0 / m), y(std::size_t(m) * m, 0.5), z(std::size_t(m) * m);
  const double        one = 1.0, zero = 0.0;
  double              best_gemm = 1e300;
  for (int r = 0; r < 3; ++r)
    {
      const auto start = std::chrono::steady_clock::now();
      dgemm_("N", "N", &m, &m, &m, &one, x.data(), &m, y.data(), &m, &zero, z.data(), &m);
      best_gemm = std::min(best_gemm, seconds_since(start));
    }

  std::printf("{\"array_mib\": %.1f, \"triad_bytes_per_second\": %.6e, "
              "\"read_bytes_per_second\": %.6e, \"dgemm_flops_per_second\": %.6e, "
              "\"checksum\": %.6e}\n",
              double(n) * sizeof(double) / 1048576.0, 24.0 * double(n) / best_triad,
              8.0 * double(n) / best_read, 2.0 * double(m) * m * m / best_gemm,
              checksum + z[0]);
  return 0;
}
