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

    /** Aᵀ B summed over the processes. */
    Dense gram(const LobpcgOperator &op, const Dense &a, const Dense &b)
    {
      Dense g = a.transpose() * b;
      if (g.size() > 0)
        op.sum(g.data(), static_cast<std::size_t>(g.size()));
      return g;
    }

    /** Global squared 2-norm of each column. */
    Eigen::VectorXd column_squares(const LobpcgOperator &op, const Dense &a)
    {
      Eigen::VectorXd s = a.colwise().squaredNorm().transpose();
      if (s.size() > 0)
        op.sum(s.data(), static_cast<std::size_t>(s.size()));
      return s;
    }

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

    /**
     * Makes @p in.v M-orthogonal to the M-orthonormal blocks of @p against and
     * M-orthonormal itself (dropping dependent directions). With @p imaged,
     * in.kv and in.mv are its images and follow every linear combination (no
     * product with K or M); otherwise M is applied first and K last.
     */
    Imaged orthonormalise(const LobpcgOperator &op, Imaged in, const std::vector<const Imaged *> &against,
                          const bool imaged = false)
    {
      Imaged out;
      Dense &v = in.v;
      if (v.cols() == 0)
        {
          out.v = out.kv = out.mv = Dense(static_cast<Eigen::Index>(op.n_local), 0);
          return out;
        }
      Dense  mv = imaged ? std::move(in.mv) : image_of(op.mass, v);
      Dense &kv = in.kv;
      const auto follow = [&](const auto &transform) {
        v  = transform(v);
        mv = transform(mv);
        if (imaged)
          kv = transform(kv);
      };
      {
        // Unit M-norm columns first, so that the threshold is relative.
        const Eigen::VectorXd d = (gram(op, v, mv)).diagonal();
        Eigen::VectorXd       scale(v.cols());
        for (Eigen::Index j = 0; j < v.cols(); ++j)
          scale[j] = d[j] > 0 ? 1.0 / std::sqrt(d[j]) : 0.0;
        follow([&](const Dense &a) { return Dense(a * scale.asDiagonal()); });
      }
      for (int pass = 0; pass < 2; ++pass)
        {
          for (const Imaged *q : against)
            if (q->v.cols() > 0)
              {
                const Dense c = gram(op, q->mv, v);
                v.noalias() -= q->v * c;
                mv.noalias() -= q->mv * c;
                if (imaged)
                  kv.noalias() -= q->kv * c;
              }
          Dense g = gram(op, v, mv);
          g       = 0.5 * (g + g.transpose()).eval();
          Eigen::SelfAdjointEigenSolver<Dense> eig(g);
          if (eig.info() != Eigen::Success)
            throw std::runtime_error("LOBPCG: eigen-decomposition of a Gram matrix failed");
          const Eigen::VectorXd &d = eig.eigenvalues();
          std::vector<Eigen::Index> keep;
          const double              largest = d.size() > 0 ? d.maxCoeff() : 0.0;
          const double              floor   = pass == 0 ? drop_threshold : drop_threshold * largest;
          for (Eigen::Index j = 0; j < d.size(); ++j)
            if (d[j] > floor)
              keep.push_back(j);
          Dense c(g.rows(), static_cast<Eigen::Index>(keep.size()));
          for (std::size_t j = 0; j < keep.size(); ++j)
            c.col(static_cast<Eigen::Index>(j)) =
              eig.eigenvectors().col(keep[j]) / std::sqrt(d[keep[j]]);
          follow([&](const Dense &a) { return Dense(a * c); });
          if (v.cols() == 0)
            break;
        }
      // mv (and with images kv) followed v through every linear combination.
      out.mv = std::move(mv);
      out.kv = imaged ? std::move(kv) : image_of(op.stiffness, v);
      out.v  = std::move(v);
      return out;
    }

    /** Σ_i parts[i] · Y[rows of part i, :]. */
    Dense combine(const std::vector<const Dense *> &parts, const Dense &y)
    {
      Dense        out = Dense::Zero(parts.front()->rows(), y.cols());
      Eigen::Index row = 0;
      for (const Dense *p : parts)
        {
          if (p->cols() > 0)
            out.noalias() += *p * y.middleRows(row, p->cols());
          row += p->cols();
        }
      return out;
    }

    /** [A_1 … A_p]ᵀ [B_1 … B_p], blockwise (no concatenated copies of the tall blocks). */
    Dense gram_parts(const LobpcgOperator &op, const std::vector<const Dense *> &a,
                     const std::vector<const Dense *> &b)
    {
      Eigen::Index n = 0;
      for (const Dense *p : a)
        n += p->cols();
      Dense        g(n, n);
      Eigen::Index r = 0;
      for (const Dense *pa : a)
        {
          Eigen::Index c = 0;
          for (const Dense *pb : b)
            {
              if (pa->cols() > 0 && pb->cols() > 0)
                g.block(r, c, pa->cols(), pb->cols()).noalias() = pa->transpose() * *pb;
              c += pb->cols();
            }
          r += pa->cols();
        }
      if (g.size() > 0)
        op.sum(g.data(), static_cast<std::size_t>(g.size()));
      return 0.5 * (g + g.transpose());
    }

    /** Relative residuals of the Ritz pairs (θ_j, x_j) from R = KX − MXΘ. */
    std::vector<double> relative_residuals(const LobpcgOperator &op, const Imaged &x,
                                           const std::vector<double> &theta)
    {
      Dense r = x.kv;
      for (Eigen::Index j = 0; j < r.cols(); ++j)
        r.col(j) -= theta[static_cast<std::size_t>(j)] * x.mv.col(j);
      const Eigen::VectorXd rr = column_squares(op, r), mm = column_squares(op, x.mv);
      std::vector<double> out(theta.size());
      for (std::size_t j = 0; j < out.size(); ++j)
        out[j] = std::sqrt(rr[Eigen::Index(j)]) /
                 (std::max(std::abs(theta[j]), 1.0) * std::sqrt(mm[Eigen::Index(j)]));
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
      next.v  = combine(s, y);
      next.kv = combine(ks, y);
      next.mv = combine(ms, y);
      if (blocks.size() > 1)
        {
          // P: the part of the new X outside the old X.
          const Dense bottom = y.bottomRows(y.rows() - m);
          p.v  = combine(std::vector<const Dense *>(s.begin() + 1, s.end()), bottom);
          p.kv = combine(std::vector<const Dense *>(ks.begin() + 1, ks.end()), bottom);
          p.mv = combine(std::vector<const Dense *>(ms.begin() + 1, ms.end()), bottom);
        }
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
