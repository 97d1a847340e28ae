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
     * Makes @p v M-orthogonal to the M-orthonormal blocks of @p against and
     * M-orthonormal itself (dropping dependent directions); returns it with
     * freshly applied images.
     */
    Imaged orthonormalise(const LobpcgOperator &op, Dense v, const std::vector<const Imaged *> &against)
    {
      Imaged out;
      if (v.cols() == 0)
        {
          out.v = out.kv = out.mv = Dense(static_cast<Eigen::Index>(op.n_local), 0);
          return out;
        }
      Dense mv = image_of(op.mass, v);
      {
        // Unit M-norm columns first, so that the threshold is relative.
        const Eigen::VectorXd d = (gram(op, v, mv)).diagonal();
        for (Eigen::Index j = 0; j < v.cols(); ++j)
          {
            const double scale = d[j] > 0 ? 1.0 / std::sqrt(d[j]) : 0.0;
            v.col(j) *= scale;
            mv.col(j) *= scale;
          }
      }
      for (int pass = 0; pass < 2; ++pass)
        {
          for (const Imaged *q : against)
            if (q->v.cols() > 0)
              {
                const Dense c = gram(op, q->mv, v);
                v.noalias() -= q->v * c;
                mv.noalias() -= q->mv * c;
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
          v  = (v * c).eval();
          mv = (mv * c).eval();
          if (v.cols() == 0)
            break;
        }
      // mv followed v through every linear combination: no fresh product needed.
      out.mv = std::move(mv);
      out.kv = image_of(op.stiffness, v);
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
    Imaged x = orthonormalise(op, std::move(start), {});
    if (x.v.cols() < m)
      throw std::invalid_argument("LOBPCG: fewer free unknowns than the block size");

    std::vector<double> theta(static_cast<std::size_t>(m));
    // Rayleigh–Ritz on the current span; the directions P from the W and P parts.
    Dense p(n, 0);
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
          std::vector<const Dense *> rest(s.begin() + 1, s.end());
          p = combine(rest, y.bottomRows(y.rows() - m));
        }
      x = std::move(next);
    };
    rayleigh_ritz({&x});

    LobpcgResult result;
    bool         fresh = true;
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
        Dense r(n, static_cast<Eigen::Index>(active.size()));
        Dense p_active(n, p.cols() > 0 ? static_cast<Eigen::Index>(active.size()) : 0);
        for (std::size_t a = 0; a < active.size(); ++a)
          {
            const Eigen::Index j = active[a];
            r.col(Eigen::Index(a)) = x.kv.col(j) - theta[std::size_t(j)] * x.mv.col(j);
            if (p.cols() > 0)
              p_active.col(Eigen::Index(a)) = p.col(j);
          }
        zero_fixed(op, r);
        Dense w = image_of(op.precondition, r);
        result.preconditioned_columns += static_cast<std::size_t>(w.cols());
        zero_fixed(op, w);
        const Imaged wi = orthonormalise(op, std::move(w), {&x});
        const Imaged pi = orthonormalise(op, std::move(p_active), {&x, &wi});
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
