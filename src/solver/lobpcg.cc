// Eigen hands its dense products to the BLAS (OpenBLAS): the tall-times-small
// products of the Rayleigh-Ritz steps are most of the dense work.
#define EIGEN_USE_BLAS
#include <alloyspec/model/random_stream.h>
#include <alloyspec/solver/lobpcg.h>

#include <Eigen/Dense>

#include <algorithm>
#include <cmath>
#include <stdexcept>
#include <string>

namespace alloyspec
{
  namespace
  {
    using Dense = Eigen::MatrixXd;

    /**
     * A direction whose M-Gram eigenvalue, after normalising the columns to
     * unit M-norm and projecting out the earlier blocks, is below this is
     * dropped: what is left of it is rounding noise (its orthogonalised form
     * would carry a relative error of about ε/this). Common practice, no source.
     */
    constexpr double drop_threshold = 1e-10;

    Dense image_of(const std::function<void(const double *, double *, unsigned int)> &f, const Dense &in)
    {
      Dense out(in.rows(), in.cols());
      if (in.cols() > 0)
        f(in.data(), out.data(), static_cast<unsigned int>(in.cols()));
      return out;
    }

    /**
     * Rows per pass of the blockwise products below. The tall blocks are far
     * larger than the cache; taking every block's rows a slice at a time keeps
     * the slices (a few blocks of this many rows and about 25 columns, under
     * 1 MB) in cache while all the small products that need them are formed,
     * so each tall block is read from memory once per product instead of once
     * per pair of blocks. Common practice (cache blocking), no source.
     */
    constexpr Eigen::Index row_slice = 512;

    void zero_fixed(const LobpcgOperator &op, Dense &a)
    {
      if (op.fixed.empty())
        return;
      for (std::size_t i = 0; i < op.n_local; ++i)
        if (op.fixed[i])
          a.row(static_cast<Eigen::Index>(i)).setZero();
    }

    /** A block with its images under K and M. */
    struct Imaged
    {
      Dense v, kv, mv;
    };

    /** (target − Σ_q q.*member C_q) T, a slice of rows at a time; C_q are consecutive row blocks of @p c. */
    Dense project_and_transform(const Dense &target, const std::vector<const Imaged *> &against,
                                Dense Imaged::*member, const Dense &c, const Dense &t)
    {
      const Eigen::Index rows = target.rows();
      Dense              out(rows, t.cols()), slice;
      for (Eigen::Index r0 = 0; r0 < rows; r0 += row_slice)
        {
          const Eigen::Index h = std::min(row_slice, rows - r0);
          slice                = target.middleRows(r0, h);
          Eigen::Index at      = 0;
          for (const Imaged *q : against)
            {
              const Dense &block = q->*member;
              slice.noalias() -= block.middleRows(r0, h) * c.middleRows(at, block.cols());
              at += block.cols();
            }
          out.middleRows(r0, h).noalias() = slice * t;
        }
      return out;
    }

    /**
     * Makes @p in.v M-orthogonal to the blocks of @p against (jointly
     * M-orthonormal) and M-orthonormal itself, dropping dependent directions.
     * With @p imaged, in.kv and in.mv are its images and follow every linear
     * combination (no product with K or M); otherwise M is applied first and
     * K last.
     *
     * Two passes of block classical Gram–Schmidt, each two sweeps over the
     * rows: one forms C = Q_Mᵀ v (Q_M the M-images of the blocks against)
     * and G = vᵀ M v together; the other forms (v − Q C) T and the same
     * combination of the images. The Gram matrix of the projected block is
     * G − CᵀC (as QᵀMQ = I), and T = U Λ^(−1/2) from its eigen-decomposition
     * U Λ Uᵀ over the directions kept. On the first pass the columns are
     * scaled to unit M-norm inside T, so that the drop threshold is relative;
     * that pass's G − CᵀC carries a cancellation error of a few ε (relative to
     * unit columns), far below the threshold, and only sets T's scale. The
     * second pass starts from a nearly M-orthonormal block, where C is tiny
     * and G − CᵀC is accurate, so the result is M-orthonormal to rounding.
     */
    Imaged orthonormalise(const LobpcgOperator &op, Imaged in, const std::vector<const Imaged *> &against,
                          const bool imaged = false)
    {
      Imaged out;
      Dense  v = std::move(in.v);
      if (v.cols() == 0)
        {
          out.v = out.kv = out.mv = Dense(static_cast<Eigen::Index>(op.n_local), 0);
          return out;
        }
      Dense mv = imaged ? std::move(in.mv) : image_of(op.mass, v);
      Dense kv = imaged ? std::move(in.kv) : Dense();
      std::vector<const Imaged *> qs;
      Eigen::Index                nq = 0;
      for (const Imaged *q : against)
        if (q->v.cols() > 0)
          {
            qs.push_back(q);
            nq += q->v.cols();
          }
      const Eigen::Index rows = v.rows();
      for (int pass = 0; pass < 2; ++pass)
        {
          const Eigen::Index b = v.cols();
          // Rows 0..nq−1: C (block q against its rows); the last b rows: G.
          Dense cg = Dense::Zero(nq + b, b);
          for (Eigen::Index r0 = 0; r0 < rows; r0 += row_slice)
            {
              const Eigen::Index h  = std::min(row_slice, rows - r0);
              const auto         vs = v.middleRows(r0, h);
              Eigen::Index       at = 0;
              for (const Imaged *q : qs)
                {
                  cg.middleRows(at, q->mv.cols()).noalias() += q->mv.middleRows(r0, h).transpose() * vs;
                  at += q->mv.cols();
                }
              cg.bottomRows(b).noalias() += mv.middleRows(r0, h).transpose() * vs;
            }
          op.sum(cg.data(), static_cast<std::size_t>(cg.size()));
          const Dense c = cg.topRows(nq);
          Dense       g = cg.bottomRows(b);
          if (nq > 0)
            g.noalias() -= c.transpose() * c;
          Eigen::VectorXd scale = Eigen::VectorXd::Ones(b);
          if (pass == 0)
            for (Eigen::Index j = 0; j < b; ++j)
              scale[j] = cg(nq + j, j) > 0 ? 1.0 / std::sqrt(cg(nq + j, j)) : 0.0;
          g = scale.asDiagonal() * (0.5 * (g + g.transpose())) * scale.asDiagonal();
          Eigen::SelfAdjointEigenSolver<Dense> eig(g);
          if (eig.info() != Eigen::Success)
            throw std::runtime_error("LOBPCG: eigen-decomposition of a Gram matrix failed");
          const Eigen::VectorXd    &d = eig.eigenvalues();
          std::vector<Eigen::Index> keep;
          const double              largest = d.size() > 0 ? d.maxCoeff() : 0.0;
          const double              floor   = pass == 0 ? drop_threshold : drop_threshold * largest;
          for (Eigen::Index j = 0; j < d.size(); ++j)
            if (d[j] > floor)
              keep.push_back(j);
          Dense t(b, static_cast<Eigen::Index>(keep.size()));
          for (std::size_t j = 0; j < keep.size(); ++j)
            t.col(static_cast<Eigen::Index>(j)) =
              scale.asDiagonal() * eig.eigenvectors().col(keep[j]) / std::sqrt(d[keep[j]]);
          v  = project_and_transform(v, qs, &Imaged::v, c, t);
          mv = project_and_transform(mv, qs, &Imaged::mv, c, t);
          if (imaged)
            kv = project_and_transform(kv, qs, &Imaged::kv, c, t);
          if (v.cols() == 0)
            break;
        }
      // mv (and with images kv) followed v through every linear combination.
      out.mv = std::move(mv);
      out.kv = imaged ? std::move(kv) : image_of(op.stiffness, v);
      out.v  = std::move(v);
      return out;
    }

    /**
     * The two combinations of the Rayleigh–Ritz step, with Y's rows split by
     * the parts: p = Σ_{i≥1} parts[i] Y_i (the directions outside the first
     * part) and x = parts[0] Y_0 + p. @p p is left empty when there is only
     * the first part.
     */
    void combine(const std::vector<const Dense *> &parts, const Dense &y, Dense &x, Dense &p)
    {
      const Eigen::Index rows = parts.front()->rows(), cols = y.cols();
      x.resize(rows, cols);
      const bool more = parts.size() > 1;
      p.resize(rows, more ? cols : 0);
      for (Eigen::Index r0 = 0; r0 < rows; r0 += row_slice)
        {
          const Eigen::Index c  = std::min(row_slice, rows - r0);
          auto               xs = x.middleRows(r0, c);
          if (more)
            {
              auto         ps = p.middleRows(r0, c);
              Eigen::Index at = parts.front()->cols();
              ps.setZero();
              for (std::size_t i = 1; i < parts.size(); ++i)
                {
                  const Dense &part = *parts[i];
                  if (part.cols() > 0)
                    ps.noalias() += part.middleRows(r0, c) * y.middleRows(at, part.cols());
                  at += part.cols();
                }
              xs = ps;
            }
          else
            xs.setZero();
          xs.noalias() += parts.front()->middleRows(r0, c) * y.topRows(parts.front()->cols());
        }
    }

    /** [A_1 … A_p]ᵀ [B_1 … B_p], blockwise (no concatenated copies of the tall blocks), a slice of rows at a time. */
    Dense gram_parts(const LobpcgOperator &op, const std::vector<const Dense *> &a,
                     const std::vector<const Dense *> &b)
    {
      Eigen::Index n = 0;
      for (const Dense *p : a)
        n += p->cols();
      Dense              g    = Dense::Zero(n, n);
      const Eigen::Index rows = a.front()->rows();
      for (Eigen::Index r0 = 0; r0 < rows; r0 += row_slice)
        {
          const Eigen::Index h = std::min(row_slice, rows - r0);
          Eigen::Index       r = 0;
          for (const Dense *pa : a)
            {
              Eigen::Index c = 0;
              for (const Dense *pb : b)
                {
                  if (pa->cols() > 0 && pb->cols() > 0)
                    g.block(r, c, pa->cols(), pb->cols()).noalias() +=
                      pa->middleRows(r0, h).transpose() * pb->middleRows(r0, h);
                  c += pb->cols();
                }
              r += pa->cols();
            }
        }
      if (g.size() > 0)
        op.sum(g.data(), static_cast<std::size_t>(g.size()));
      return 0.5 * (g + g.transpose());
    }

    /** Relative residuals of the Ritz pairs (θ_j, x_j) from R = KX − MXΘ, a slice of rows at a time (R is not stored). */
    std::vector<double> relative_residuals(const LobpcgOperator &op, const Imaged &x,
                                           const std::vector<double> &theta)
    {
      const Eigen::Index m = x.kv.cols(), rows = x.kv.rows();
      const Eigen::Map<const Eigen::VectorXd> t(theta.data(), m);
      Eigen::VectorXd sums = Eigen::VectorXd::Zero(2 * m);
      Dense           r;
      for (Eigen::Index r0 = 0; r0 < rows; r0 += row_slice)
        {
          const Eigen::Index h = std::min(row_slice, rows - r0);
          r = x.kv.middleRows(r0, h) - x.mv.middleRows(r0, h) * t.asDiagonal();
          sums.head(m) += r.colwise().squaredNorm().transpose();
          sums.tail(m) += x.mv.middleRows(r0, h).colwise().squaredNorm().transpose();
        }
      if (sums.size() > 0)
        op.sum(sums.data(), static_cast<std::size_t>(sums.size()));
      std::vector<double> out(theta.size());
      for (std::size_t j = 0; j < out.size(); ++j)
        out[j] = std::sqrt(sums[Eigen::Index(j)]) /
                 (std::max(std::abs(theta[j]), 1.0) * std::sqrt(sums[m + Eigen::Index(j)]));
      return out;
    }
  } // namespace

  LobpcgResult lobpcg(const LobpcgOperator &op, const LobpcgSettings &settings)
  {
    const auto   n = static_cast<Eigen::Index>(op.n_local);
    const auto   m = static_cast<Eigen::Index>(settings.block_size);
    if (m < 1 || settings.n_converged_needed > settings.block_size)
      throw std::invalid_argument("LOBPCG: the block must hold the pairs to converge");

    // Start block: depends on (seed, global row, column) only, so the
    // iteration is the same whatever the number of processes.
    Dense start(n, m);
    for (Eigen::Index j = 0; j < m; ++j)
      for (Eigen::Index i = 0; i < n; ++i)
        start(i, j) = 2.0 * uniform_open01(settings.seed, static_cast<std::uint64_t>(j),
                                           op.row_offset + static_cast<std::uint64_t>(i)) - 1.0;
    zero_fixed(op, start);
    Imaged x = orthonormalise(op, Imaged{std::move(start), {}, {}}, {});
    if (x.v.cols() < m)
      throw std::invalid_argument("LOBPCG: fewer free unknowns than the block size");

    std::vector<double> theta(static_cast<std::size_t>(m));
    // Rayleigh–Ritz on the current span; the directions P from the W and P parts.
    // P with its images K P and M P, combined from those of W and P (not applied).
    Imaged p{Dense(n, 0), Dense(n, 0), Dense(n, 0)};
    const auto rayleigh_ritz = [&](const std::vector<const Imaged *> &blocks) {
      std::vector<const Dense *> s, ks, ms;
      for (const Imaged *b : blocks)
        {
          s.push_back(&b->v);
          ks.push_back(&b->kv);
          ms.push_back(&b->mv);
        }
      const Dense h = gram_parts(op, s, ks), g = gram_parts(op, s, ms);
      Eigen::GeneralizedSelfAdjointEigenSolver<Dense> eig(h, g);
      if (eig.info() != Eigen::Success)
        throw std::runtime_error("LOBPCG: the projected eigenproblem failed (Gram matrix not "
                                 "positive definite)");
      const Dense y = eig.eigenvectors().leftCols(m);
      for (Eigen::Index j = 0; j < m; ++j)
        theta[static_cast<std::size_t>(j)] = eig.eigenvalues()[j];
      Imaged next;
      combine(s, y, next.v, p.v);
      combine(ks, y, next.kv, p.kv);
      combine(ms, y, next.mv, p.mv);
      x = std::move(next);
    };
    rayleigh_ritz({&x});

    LobpcgResult result;
    bool         fresh = true, fresh_p = true;
    for (unsigned int it = 1; it <= settings.max_iterations; ++it)
      {
        result.iterations = it;
        std::vector<double> res = relative_residuals(op, x, theta);
        const auto all_needed = [&] {
          if (settings.stop)
            return settings.stop(theta, res);
          for (unsigned int j = 0; j < settings.n_converged_needed; ++j)
            if (!(res[j] <= settings.tolerance))
              return false;
          return true;
        };
        // KX and MX drift from K X and M X by rounding in the updates; the
        // convergence test is always made on freshly applied ones.
        if (!fresh && (all_needed() || it % settings.refresh_every == 0))
          {
            fresh_p = true;
            x.kv  = image_of(op.stiffness, x.v);
            x.mv  = image_of(op.mass, x.v);
            res   = relative_residuals(op, x, theta);
            fresh = true;
          }
        if (fresh && all_needed())
          {
            result.converged = true;
            result.residuals = res;
            break;
          }
        result.residuals = res;

        // Soft locking: only the unconverged columns get new directions.
        std::vector<Eigen::Index> active;
        for (Eigen::Index j = 0; j < m; ++j)
          if (!(res[static_cast<std::size_t>(j)] <= settings.tolerance))
            active.push_back(j);
        Dense        r(n, static_cast<Eigen::Index>(active.size()));
        const auto   n_p = p.v.cols() > 0 ? static_cast<Eigen::Index>(active.size()) : 0;
        Imaged       p_active{Dense(n, n_p), Dense(n, n_p), Dense(n, n_p)};
        for (std::size_t a = 0; a < active.size(); ++a)
          {
            const Eigen::Index j = active[a];
            r.col(Eigen::Index(a)) = x.kv.col(j) - theta[std::size_t(j)] * x.mv.col(j);
            if (n_p > 0)
              {
                p_active.v.col(Eigen::Index(a))  = p.v.col(j);
                p_active.kv.col(Eigen::Index(a)) = p.kv.col(j);
                p_active.mv.col(Eigen::Index(a)) = p.mv.col(j);
              }
          }
        zero_fixed(op, r);
        Dense w = image_of(op.precondition, r);
        result.preconditioned_columns += static_cast<std::size_t>(w.cols());
        zero_fixed(op, w);
        const Imaged wi = orthonormalise(op, Imaged{std::move(w), {}, {}}, {&x});
        // P's images come from the last Rayleigh–Ritz step; they are applied
        // afresh with X's, every refresh_every iterations, against drift.
        const bool   imaged = !fresh_p;
        const Imaged pi = orthonormalise(op, std::move(p_active), {&x, &wi}, imaged);
        fresh_p = false;
        rayleigh_ritz({&x, &wi, &pi});
        fresh = false;
      }
    if (!fresh)
      {
        x.kv             = image_of(op.stiffness, x.v);
        x.mv             = image_of(op.mass, x.v);
        result.residuals = relative_residuals(op, x, theta);
      }
    result.theta = theta;
    result.vectors.assign(x.v.data(), x.v.data() + x.v.size());
    result.stiffness.assign(x.kv.data(), x.kv.data() + x.kv.size());
    result.mass.assign(x.mv.data(), x.mv.data() + x.mv.size());
    return result;
  }
} // namespace alloyspec
