#include <alloyspec/solver/block_krylov.h>

#include <algorithm>
#include <cmath>
#include <cstring>
#include <memory>
#include <numeric>
#include <stdexcept>
#include <string>

extern "C"
{
  void dgemm_(const char *transa, const char *transb, const int *m, const int *n, const int *k,
              const double *alpha, const double *a, const int *lda, const double *b, const int *ldb,
              const double *beta, double *c, const int *ldc);
  void dsyevd_(const char *jobz, const char *uplo, const int *n, double *a, const int *lda,
               double *w, double *work, const int *lwork, int *iwork, const int *liwork, int *info);
}

namespace alloyspec
{
  namespace
  {
    /** C = alpha op(A) op(B) + beta C, column-major (BLAS: the tall products dominate the cost). */
    void gemm(char ta, char tb, std::size_t m, std::size_t n, std::size_t k, double alpha,
              const double *a, std::size_t lda, const double *b, std::size_t ldb, double beta,
              double *c, std::size_t ldc)
    {
      if (m == 0 || n == 0)
        return;
      const int mi = int(m), ni = int(n), ki = int(k), la = int(std::max<std::size_t>(lda, 1)),
                lb = int(std::max<std::size_t>(ldb, 1)), lc = int(std::max<std::size_t>(ldc, 1));
      if (k == 0)
        {
          for (std::size_t j = 0; j < n; ++j)
            for (std::size_t i = 0; i < m; ++i)
              c[i + j * ldc] *= beta;
          return;
        }
      dgemm_(&ta, &tb, &mi, &ni, &ki, &alpha, a, &la, b, &lb, &beta, c, &lc);
    }

    /**
     * Eigen-decomposition of the symmetric n × n matrix whose upper triangle
     * is in @p a (column-major): on return @p a holds the eigenvectors and
     * @p w the eigenvalues, ascending.
     */
    void symmetric_eigen(std::size_t n, std::vector<double> &a, std::vector<double> &w)
    {
      w.assign(n, 0.0);
      if (n == 0)
        return;
      // Divide and conquer (dsyevd) rather than QR iteration (dsyev): the
      // same decomposition to rounding, and at the Rayleigh–Ritz size of
      // k = 200 (m = 672) the QR sweeps (dlasr) were 2.7 % of a solve (perf).
      const int   ni = int(n);
      int         info = 0, lwork = -1, liwork = -1, iquery = 0;
      double      query = 0;
      const char  jobz = 'V', uplo = 'U';
      dsyevd_(&jobz, &uplo, &ni, a.data(), &ni, w.data(), &query, &lwork, &iquery, &liwork, &info);
      lwork  = std::max(1, int(query));
      liwork = std::max(1, iquery);
      std::vector<double> work(static_cast<std::size_t>(lwork));
      std::vector<int>    iwork(static_cast<std::size_t>(liwork));
      dsyevd_(&jobz, &uplo, &ni, a.data(), &ni, w.data(), work.data(), &lwork, iwork.data(),
              &liwork, &info);
      if (info != 0)
        throw std::runtime_error("block Krylov-Schur: LAPACK dsyevd failed (info " +
                                 std::to_string(info) + ")");
    }

    /**
     * Largest basis checked for convergence after every block (common
     * practice, no source: a Rayleigh–Ritz of 128 columns is a few
     * milliseconds, a block of 8 solves at 5k unknowns about ten).
     */
    constexpr std::size_t early_check_columns = 128;

    /** A value in (−1, 1) that depends only on (seed, global row, column): splitmix64. */
    double start_value(std::uint64_t seed, std::uint64_t row, std::uint64_t column)
    {
      std::uint64_t z = seed * 0x9E3779B97F4A7C15ULL ^ (row + 0x632BE59BD9B4E019ULL) * 0xBF58476D1CE4E5B9ULL ^
                        (column + 1) * 0x94D049BB133111EBULL;
      z = (z ^ (z >> 30)) * 0xBF58476D1CE4E5B9ULL;
      z = (z ^ (z >> 27)) * 0x94D049BB133111EBULL;
      z ^= z >> 31;
      return 2.0 * (double(z >> 11) * 0x1.0p-53) - 1.0;
    }

    /** Basis V (n × capacity), its M-image MV, and the projected matrix H (capacity²). */
    class Basis
    {
    public:
      /** @p block: the widest block normalise() is given. */
      Basis(const BlockOperator &op, std::size_t capacity, std::size_t block, std::uint64_t seed)
        : op_(op), n_(op.n_local), capacity_(capacity), block_(block), seed_(seed),
          // Not zero-filled: every column is written before it is read, and
          // at a few hundred columns of 10⁵ rows a fill is a pass over a
          // gigabyte. (perf attributed a tenth of the run at L = 12, k = 200 to
          // value-initialisation and page faults, but removing them, with the
          // in-place restart, changed the measured time only within noise;
          // the gain measured is memory, 3.24 → 2.88 GB.)
          v_(new double[n_ * capacity]), mv_(new double[n_ * capacity]),
          w_(new double[n_ * block]), mw_(new double[n_ * block]),
          h_(capacity * capacity, 0.0)
      {}

      double *v(std::size_t column) { return v_.get() + n_ * column; }
      double *mv(std::size_t column) { return mv_.get() + n_ * column; }

      /**
       * Thick restart in place: columns [0, kept) of V and of MV become
       * V_m Y and MV_m Y (Y: m × kept, column-major), and the block
       * [m, m+b) moves to [kept, kept+b). A row of V Y needs only the same
       * row of V, so the product is formed a slab of rows at a time in a
       * small buffer and written back over V, instead of into two new
       * n × kept arrays (at L = 12, k = 200 these were 0.6 GB a restart,
       * allocated and faulted in every time).
       */
      void restart(std::size_t m, std::size_t kept, std::size_t b, const double *y)
      {
        constexpr std::size_t slab = 256;
        std::vector<double>   part(slab * kept);
        for (double *base : {v_.get(), mv_.get()})
          {
            for (std::size_t r0 = 0; r0 < n_; r0 += slab)
              {
                const std::size_t h = std::min(slab, n_ - r0);
                gemm('N', 'N', h, kept, m, 1.0, base + r0, n_, y, m, 0.0, part.data(), h);
                for (std::size_t j = 0; j < kept; ++j)
                  std::memcpy(base + r0 + n_ * j, part.data() + h * j, sizeof(double) * h);
              }
            std::memmove(base + n_ * kept, base + n_ * m, sizeof(double) * n_ * b);
          }
      }
      double &h(std::size_t i, std::size_t j) { return h_[i + capacity_ * j]; }
      std::size_t n() const { return n_; }

      /** Columns [c, c+b) get pseudo-random values (a fresh stream for each @p draw). */
      void randomise(std::size_t c, std::size_t b, std::uint64_t draw)
      {
        for (std::size_t j = 0; j < b; ++j)
          for (std::size_t i = 0; i < n_; ++i)
            v(c + j)[i] = start_value(seed_ + draw, op_.row_offset + i, c + j);
      }

      /**
       * One classical Gram–Schmidt pass of columns [c, c+b) against columns
       * [first, c): W ← W − V P with P = V^T M W, added to @p coefficients
       * (c × b) and returned.
       */
      std::vector<double> gram_schmidt_pass(std::size_t first, std::size_t c, std::size_t b,
                                            std::vector<double> &coefficients)
      {
        const std::size_t   rows = c - first;
        std::vector<double> pass(rows * b);
        gemm('T', 'N', rows, b, n_, 1.0, mv(first), n_, v(c), n_, 0.0, pass.data(), rows);
        op_.sum(pass.data(), pass.size());
        gemm('N', 'N', n_, b, rows, -1.0, v(first), n_, pass.data(), rows, 1.0, v(c), n_);
        for (std::size_t j = 0; j < b; ++j)
          for (std::size_t i = 0; i < rows; ++i)
            coefficients[first + i + c * j] += pass[i + rows * j];
        return pass;
      }

      /**
       * Makes columns [c, c+b) M-orthogonal to columns [0, c); returns the
       * c × b coefficients (V^T M W) and leaves M W in mv(c).
       *
       * In exact arithmetic the new block W = T Q_j couples only to the
       * columns [coupled, c): by the Krylov–Schur relation and the
       * M-self-adjointness of T, @f$V_i^T M T Q_j = (T V_i)^T M Q_j@f$ vanishes
       * unless @f$T V_i@f$ has a component along @f$Q_j@f$, i.e. for the
       * previous block and Q_j itself, or, for the first block after a
       * restart, the kept Ritz vectors. So the first pass runs against those
       * columns only (the three-term step of block Lanczos) and one full
       * pass removes what rounding left along the rest of the basis. A second
       * full pass follows only for the columns where the full pass removed
       * more than 1/√2 of the M-norm (Daniel, Gragg, Kaufman & Stewart, Math.
       * Comp. 30 (1976) 772): with V M-orthonormal, Pythagoras gives
       * @f$\|w_{\text{before}}\|_M^2 = \|w_{\text{after}}\|_M^2 + \|p\|_2^2@f$,
       * so the test is @f$\|p\|_2 > \|w_{\text{after}}\|_M@f$. When
       * coupled = 0 this is classical Gram–Schmidt applied twice, as before.
       * Measured at L = 8, k = 200 (Q2, r = 2): the full CGS2 took as long as
       * the block solves themselves.
       */
      std::vector<double> orthogonalise(std::size_t c, std::size_t b, std::size_t coupled)
      {
        std::vector<double> coefficients(c * b, 0.0);
        gram_schmidt_pass(coupled, c, b, coefficients);
        std::vector<double> full = gram_schmidt_pass(0, c, b, coefficients);
        op_.mass(v(c), mv(c), unsigned(b));
        std::vector<double> norm2(b, 0.0);
        for (std::size_t j = 0; j < b; ++j)
          for (std::size_t i = 0; i < n_; ++i)
            norm2[j] += v(c + j)[i] * mv(c + j)[i];
        op_.sum(norm2.data(), b);
        bool again = false;
        for (std::size_t j = 0; j < b; ++j)
          {
            double p2 = 0;
            for (std::size_t i = 0; i < c; ++i)
              p2 += full[i + c * j] * full[i + c * j];
            again = again || p2 > norm2[j];
          }
        ++full_passes_;
        if (again)
          {
            // Again against everything, and M W updated from MV (no second mass product).
            std::vector<double> pass = gram_schmidt_pass(0, c, b, coefficients);
            gemm('N', 'N', n_, b, c, -1.0, mv(0), n_, pass.data(), c, 1.0, mv(c), n_);
            ++full_passes_;
          }
        return coefficients;
      }

      /** Full Gram–Schmidt passes so far (one or two per block). */
      std::size_t full_passes() const { return full_passes_; }

      /**
       * M-orthonormalises columns [c, c+b) among themselves (they must be
       * M-orthogonal to [0, c) already), W = W' R; returns R (b × b). MV of
       * the block is formed by one mass product and carried through the
       * transformations (or taken from mv(c) when @p mass_given). Lost
       * directions are replaced, with zero rows in R.
       */
      std::vector<double> normalise(std::size_t c, std::size_t b, std::uint64_t &draws,
                                    bool mass_given = false)
      {
        if (b > block_)
          throw std::logic_error("block Krylov-Schur: a block wider than the basis was made for");
        if (!mass_given)
          op_.mass(v(c), mv(c), unsigned(b));
        std::vector<double> r(b * b, 0.0);
        for (std::size_t i = 0; i < b; ++i)
          r[i + b * i] = 1.0;
        for (int pass = 0; pass < 2; ++pass)
          {
            std::vector<double> g(b * b), s;
            gemm('T', 'N', b, b, n_, 1.0, v(c), n_, mv(c), n_, 0.0, g.data(), b);
            op_.sum(g.data(), g.size());
            symmetric_eigen(b, g, s);
            const double largest = std::max(s.empty() ? 0.0 : s.back(), 0.0);
            // Relative size below which a direction is numerically lost
            // (common practice, no source: a few hundred ulps of the largest).
            const double lost = largest * 1e-13;
            // W' = W U S^{-1/2}, R_pass = S^{1/2} U^T.
            std::vector<double> scaled(g), r_pass(b * b, 0.0);
            std::vector<bool>   replaced(b, false);
            for (std::size_t j = 0; j < b; ++j)
              {
                const bool keep = s[j] > lost && largest > 0;
                replaced[j]     = !keep;
                for (std::size_t i = 0; i < b; ++i)
                  {
                    scaled[i + b * j] = keep ? g[i + b * j] / std::sqrt(s[j]) : 0.0;
                    r_pass[j + b * i] = keep ? std::sqrt(s[j]) * g[i + b * j] : 0.0;
                  }
              }
            gemm('N', 'N', n_, b, b, 1.0, v(c), n_, scaled.data(), b, 0.0, w_.get(), n_);
            gemm('N', 'N', n_, b, b, 1.0, mv(c), n_, scaled.data(), b, 0.0, mw_.get(), n_);
            std::memcpy(v(c), w_.get(), sizeof(double) * n_ * b);
            std::memcpy(mv(c), mw_.get(), sizeof(double) * n_ * b);
            if (std::find(replaced.begin(), replaced.end(), true) != replaced.end())
              replace_lost(c, b, replaced, draws);
            // R = R_pass R.
            std::vector<double> product(b * b);
            gemm('N', 'N', b, b, b, 1.0, r_pass.data(), b, r.data(), b, 0.0, product.data(), b);
            r = std::move(product);
          }
        return r;
      }

      /** T V_m = V_m H + Q B E^T: the projected matrix and its coupling rows are in h_. */
      std::size_t capacity() const { return capacity_; }
      void        clear_h() { std::fill(h_.begin(), h_.end(), 0.0); }

    private:
      /** Fresh random columns for the lost ones, M-orthonormal to [0, c) and to the kept ones. */
      void replace_lost(std::size_t c, std::size_t b, const std::vector<bool> &replaced,
                        std::uint64_t &draws)
      {
        for (std::size_t j = 0; j < b; ++j)
          if (replaced[j])
            for (int attempt = 0; attempt < 3; ++attempt)
              {
                ++draws;
                for (std::size_t i = 0; i < n_; ++i)
                  v(c + j)[i] = start_value(seed_ + 7919 * draws, op_.row_offset + i, c + j);
                // Against everything before it in the basis, the kept block columns included.
                const std::size_t before = c + j;
                for (int repeat = 0; repeat < 2; ++repeat)
                  {
                    op_.mass(v(c + j), mv(c + j), 1);
                    std::vector<double> coeff(before);
                    gemm('T', 'N', before, 1, n_, 1.0, mv(0), n_, v(c + j), n_, 0.0, coeff.data(),
                         before);
                    op_.sum(coeff.data(), coeff.size());
                    gemm('N', 'N', n_, 1, before, -1.0, v(0), n_, coeff.data(), before, 1.0,
                         v(c + j), n_);
                  }
                // Later lost columns are redrawn after this one, so order is fine.
                op_.mass(v(c + j), mv(c + j), 1);
                double norm2 = 0;
                for (std::size_t i = 0; i < n_; ++i)
                  norm2 += v(c + j)[i] * mv(c + j)[i];
                op_.sum(&norm2, 1);
                if (norm2 > 0)
                  {
                    const double scale = 1.0 / std::sqrt(norm2);
                    for (std::size_t i = 0; i < n_; ++i)
                      {
                        v(c + j)[i] *= scale;
                        mv(c + j)[i] *= scale;
                      }
                    break;
                  }
              }
      }

      const BlockOperator &op_;
      std::size_t          n_, capacity_, block_;
      std::uint64_t        seed_;
      std::unique_ptr<double[]> v_, mv_, w_, mw_;
      std::vector<double>       h_;
      std::size_t          full_passes_ = 0;
    };
  } // namespace

  BlockKrylovResult block_krylov_schur(const BlockOperator &op, const BlockKrylovSettings &settings)
  {
    const std::size_t n = op.n_local;
    const std::size_t b = std::max(1u, settings.block_size);
    const std::size_t k = std::max(1u, settings.n_wanted);
    double            global_rows = double(n);
    op.sum(&global_rows, 1);
    // Basis before a restart and Ritz vectors kept at a restart. Measured at
    // L = 8 (Q2, r = 2, 35,937 DoFs), k = 220, b = 32, time per solve:
    // (ncv, keep) = (448, 252) 29.5 s, (512, 300) 26.5 s, (640, 320) 24.0 s,
    // (640, 400) 25.1 s, (800, 400) 24.9 s: about 3k and 1.5k.
    std::size_t ncv = settings.max_basis ? settings.max_basis : std::max(3 * k, k + 6 * b);
    ncv             = (ncv + b - 1) / b * b;
    const std::size_t keep = std::min(std::max(k + b, (3 * k + 1) / 2), ncv - std::min(ncv, 2 * b));
    if (double(ncv + b) > global_rows || keep < k)
      throw std::invalid_argument("block Krylov-Schur: the problem (" +
                                  std::to_string(std::size_t(global_rows)) +
                                  " unknowns) is too small for " + std::to_string(ncv + b) +
                                  " basis vectors");

    Basis         basis(op, ncv + b, b, settings.seed);
    std::uint64_t draws = 0;
    basis.randomise(0, b, 0);
    // The first column gets a constant part: the lowest eigenfunction of a
    // Schrödinger operator does not change sign (Courant & Hilbert, Methods
    // of Mathematical Physics, vol. I, ch. VI; from memory), so a constant
    // overlaps well with its discrete approximation, and the random part
    // keeps every other direction. Measured at the cut (1 pair below it, L = 6,
    // Q2, tilted realisations): 15.0 → 13.4 single solves per realisation.
    for (std::size_t i = 0; i < n; ++i)
      basis.v(0)[i] += 1.0;
    basis.normalise(0, b, draws);

    BlockKrylovResult result;
    std::size_t       cur = 0;
    // Basis columns at the start of this cycle (the kept Ritz vectors).
    std::size_t       restart_columns = 0;
    std::vector<double> y, theta, by, residual;
    // Rayleigh–Ritz on the first m columns: θ (largest first), Y, B E^T Y and
    // the residual of every Ritz pair; returns how many of the leading pairs
    // have converged.
    const auto rayleigh_ritz = [&](std::size_t m) {
      // The upper triangle (the coefficients measured by Gram–Schmidt; T is
      // M-self-adjoint, so H is symmetric).
      y.assign(m * m, 0.0);
      for (std::size_t j = 0; j < m; ++j)
        for (std::size_t i = 0; i <= j; ++i)
          y[i + m * j] = basis.h(i, j);
      symmetric_eigen(m, y, theta);
      // Largest θ first.
      std::reverse(theta.begin(), theta.end());
      for (std::size_t j = 0; j < m / 2; ++j)
        std::swap_ranges(y.begin() + m * j, y.begin() + m * (j + 1), y.begin() + m * (m - 1 - j));

      // Residual of Ritz pair i: ‖B E^T y_i‖ with the coupling rows [m, m+b).
      std::vector<double> coupling(b * m);
      by.assign(b * m, 0.0);
      for (std::size_t j = 0; j < m; ++j)
        for (std::size_t i = 0; i < b; ++i)
          coupling[i + b * j] = basis.h(m + i, j);
      gemm('N', 'N', b, m, m, 1.0, coupling.data(), b, y.data(), m, 0.0, by.data(), b);
      residual.assign(m, 0.0);
      std::size_t converged = 0;
      for (std::size_t j = 0; j < m; ++j)
        {
          double s = 0;
          for (std::size_t i = 0; i < b; ++i)
            s += by[i + b * j] * by[i + b * j];
          residual[j] = std::sqrt(s);
        }
      while (converged < k && residual[converged] <= settings.tolerance * std::abs(theta[converged]))
        ++converged;
      return converged;
    };
    for (unsigned int cycle = 0;; ++cycle)
      {
        std::size_t n_converged = 0;
        bool        checked     = false;
        // Expansion: T Q = V C + Q' R for the newest block Q.
        while (cur + b <= ncv)
          {
            op.solve(basis.mv(cur), basis.v(cur + b), unsigned(b));
            result.solved_columns += b;
            // Columns the new block couples to: the previous block, or after
            // a restart (cur == kept) and at the start everything.
            const std::size_t coupled = cur == restart_columns ? 0 : cur - b;
            const std::vector<double> coefficients = basis.orthogonalise(cur + b, b, coupled);
            const std::vector<double> r            = basis.normalise(cur + b, b, draws, true);
            for (std::size_t j = 0; j < b; ++j)
              {
                for (std::size_t i = 0; i < cur + b; ++i)
                  basis.h(i, cur + j) = coefficients[i + (cur + b) * j];
                for (std::size_t i = 0; i < b; ++i)
                  basis.h(cur + b + i, cur + j) = r[i + b * j];
              }
            cur += b;
            // A small basis is checked after every block, so that a few
            // wanted pairs (the band-edge mode) stop the expansion as soon as
            // they have converged rather than when the basis is full. The
            // check costs O(m³) with m ≤ early_check_columns, against the
            // n·m·b of the block's orthogonalisation.
            if (cur >= k && cur + b <= ncv && cur <= early_check_columns)
              {
                n_converged = rayleigh_ritz(cur);
                checked     = true;
                if (n_converged >= k)
                  break;
              }
            checked = false;
          }
        const std::size_t m = cur;
        if (!checked)
          n_converged = rayleigh_ritz(m);

        const bool done = n_converged >= k || cycle >= settings.max_restarts;
        const std::size_t kept = done ? std::min(k, m) : keep;
        if (done)
          {
            // X = V_m Y_kept, the returned vectors.
            std::vector<double> x(n * kept);
            gemm('N', 'N', n, kept, m, 1.0, basis.v(0), n, y.data(), m, 0.0, x.data(), n);
            const std::size_t reported = n_converged >= k ? k : n_converged;
            result.converged = n_converged >= k;
            result.theta.assign(theta.begin(), theta.begin() + reported);
            result.residuals.assign(residual.begin(), residual.begin() + reported);
            x.resize(n * reported);
            result.vectors = std::move(x);
            result.restarts = cycle;
            result.full_passes = basis.full_passes();
            return result;
          }
        // Thick restart: [X_kept, Q] with T X = X Θ + Q (B E^T Y).
        basis.restart(m, kept, b, y.data());
        basis.clear_h();
        for (std::size_t j = 0; j < kept; ++j)
          {
            basis.h(j, j) = theta[j];
            for (std::size_t i = 0; i < b; ++i)
              {
                basis.h(kept + i, j) = by[i + b * j];
                basis.h(j, kept + i) = by[i + b * j];
              }
          }
        cur             = kept;
        restart_columns = kept;
      }
  }
} // namespace alloyspec
