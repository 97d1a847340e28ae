#include "block_product.h"
#include "iterative_workspace.h"
#include "list_cut.h"
#include "petsc_handle.h"

#include <alloyspec/core/collective_errors.h>
#include <alloyspec/core/errors.h>
#include <alloyspec/core/format.h>
#include <alloyspec/fe/spectral_problem.h>
#include <alloyspec/solver/eigen_enclosure.h>
#include <alloyspec/solver/eigen_solver.h>
#include <alloyspec/solver/lobpcg.h>

#include <Eigen/Dense>

#include <mpi.h>

#include <algorithm>
#include <cmath>
#include <limits>
#include <sstream>
#include <stdexcept>
#include <string>

namespace alloyspec
{
  namespace
  {
    /**
     * Distance δ of the AMG's shift below the lowest possible eigenvalue
     * (min q): K − σM is then positive definite with its smallest eigenvalue
     * at least δ μ_M. δ is 1e-5 of the width of the spectrum (upper_bound −
     * lower_bound; 0.5 when no upper bound is known, the direct path's safe
     * margin), so it scales with the units and the mesh. LOBPCG's rate
     * depends on the gaps of the wanted eigenvalues relative to their
     * distance from σ; measured at L = 24 (Q2, k = 20, width 1945): 60
     * iterations at δ = 0.5, 48 at 0.05, 47 at 0.01 and at 1e-4, with the
     * same eigenvalues. Our choice from that measurement, no source.
     */
    double shift_margin(const SpectralProblem &problem)
    {
      constexpr double share_of_width = 1e-5;
      const double     width          = problem.upper_bound - problem.lower_bound;
      return width > 0 ? share_of_width * width : 0.5;
    }
    /** LOBPCG iterations per attempt before it counts as not converged (measured: 30-80 with AMG). */
    constexpr unsigned int max_iterations = 600;
    constexpr unsigned int max_attempts   = 3;
    /**
     * Rounding allowance of the enclosures: this many units of roundoff times
     * (‖K‖_∞ + |θ| ‖M‖_∞) ‖x‖₂² for an M-normalised x. The bounds of
     * eigen_enclosure.h hold in exact arithmetic for the stored vectors; a
     * computed Rayleigh quotient differs from the exact one by rounding in
     * dot products of length n, whose typical size (random rounding errors,
     * blocked summation) this models. A model, not a worst-case bound (that
     * would grow like n ε); common practice, no source.
     */
    constexpr double rounding_units = 16.0;

    /**
     * Collective over @p comm: refuses, on every rank of it, a block iteration
     * of @p block columns that needs more than @p budget bytes on some rank.
     * The rank's need is a lower estimate: its rows of K and M (a value and a
     * column index per stored entry, as PETSc counts them) and LOBPCG's 15
     * vectors per column of its @p n_local rows (lobpcg.h; from its second
     * iteration on it holds X, W and P with their images under K and M, and
     * the next X and P with theirs, at once); the mesh, the matrices without
     * potential and the multigrid hierarchy come on top. Only a rank
     * knows its own rows, and the partition gives some ranks more than
     * others, so the first rank over the budget may be the only one: its
     * team-mates would otherwise wait for it in the iteration's first global
     * sum, and an allocation failure there (std::bad_alloc) would leave them
     * waiting for ever. @p budget 0: no budget.
     */
    void check_block_memory(MPI_Comm comm, Mat K, Mat M, std::size_t n_local, unsigned int block,
                            double budget)
    {
      if (!(budget > 0))
        return;
      MatInfo stiffness{}, mass{};
      ALLOYSPEC_CHECK(MatGetInfo(K, MAT_LOCAL, &stiffness));
      ALLOYSPEC_CHECK(MatGetInfo(M, MAT_LOCAL, &mass));
      constexpr double mib      = 1048576.0;
      const double     matrices = (stiffness.nz_used + mass.nz_used) *
                              double(sizeof(PetscScalar) + sizeof(PetscInt));
      const double vectors = 15.0 * block * double(n_local) * sizeof(double);
      std::string  error;
      if (matrices + vectors > budget)
        error = "option '--memory-budget': the iterative eigen-solve needs at least " +
                short_number((matrices + vectors) / mib) + " MiB on this rank (its " +
                std::to_string(n_local) + " rows of K and M: " + short_number(matrices / mib) +
                " MiB; the block of " + std::to_string(block) + " vectors of those rows: " +
                short_number(vectors / mib) + " MiB), more than the budget of " +
                short_number(budget / mib) + " MiB per rank; allowed: a budget of at least " +
                short_number((matrices + vectors) / mib) +
                " MiB, or more '--ranks-per-realisation', or fewer eigenvalues "
                "('spectrum/eigenvalues', 'spectrum/energy cutoff'). Realisations already "
                "stored are kept: continue with --resume";
      throw_if_any_failed(comm, error, true);
    }

    /** The whole vector on every process of @p comm from each one's contiguous rows. */
    std::vector<double> gather_whole(MPI_Comm comm, const double *local, std::size_t n_local,
                                     std::size_t n_global)
    {
      int ranks = 1;
      MPI_Comm_size(comm, &ranks);
      if (ranks == 1)
        return std::vector<double>(local, local + n_local);
      std::vector<int> counts(static_cast<std::size_t>(ranks), 0), offsets(static_cast<std::size_t>(ranks), 0);
      const int        mine = static_cast<int>(n_local);
      MPI_Allgather(&mine, 1, MPI_INT, counts.data(), 1, MPI_INT, comm);
      for (int r = 1; r < ranks; ++r)
        offsets[std::size_t(r)] = offsets[std::size_t(r - 1)] + counts[std::size_t(r - 1)];
      std::vector<double> whole(n_global);
      MPI_Allgatherv(local, mine, MPI_DOUBLE, whole.data(), counts.data(), offsets.data(),
                     MPI_DOUBLE, comm);
      return whole;
    }
  } // namespace

  std::string EigenSolver::method_for(const SpectralProblem &problem) const
  {
    if (settings_.method != "auto")
      return settings_.method;
    return problem.n_genuine() >= settings_.auto_crossover ? "iterative" : "tuned";
  }

  EigenResult EigenSolver::solve_iterative(const Pencil &pencil)
  {
    const SpectralProblem &problem   = *pencil.problem;
    const std::size_t      n_genuine = problem.n_genuine();
    const bool             countable = n_genuine <= settings_.inertia_limit;

    std::size_t wanted = settings_.n_eigenvalues;
    if (settings_.energy_cutoff)
      {
        if (!countable)
          throw InputError("parameter 'spectrum/energy cutoff': with the iterative solver the "
                           "number of eigenvalues below a cutoff is found by an inertia count, "
                           "and this problem has " + std::to_string(n_genuine) +
                           " unknowns, more than 'spectrum/inertia check limit' = " +
                           std::to_string(settings_.inertia_limit) +
                           " (use 'spectrum/eigenvalues' instead of a cutoff, or raise the limit)");
        wanted = verified_count(pencil, *settings_.energy_cutoff);
        if (wanted > settings_.max_eigenvalues)
          throw InputError("parameter 'spectrum/energy cutoff': " + std::to_string(wanted) +
                           " eigenvalues lie below the cutoff, more than 'spectrum/maximum "
                           "eigenvalues' = " + std::to_string(settings_.max_eigenvalues));
        if (wanted == 0)
          {
            EigenResult empty;
            empty.complete_up_to = *settings_.energy_cutoff;
            return empty;
          }
      }

    // Guard vectors beyond the wanted ones speed up convergence (the rate of
    // pair i depends on the gap to the block's first unwanted value) and give
    // the Ritz value beyond the cut. Common practice, no source.
    unsigned int block = static_cast<unsigned int>(wanted + std::max<std::size_t>(5, wanted / 5));
    if (3 * std::size_t(block) + 10 > n_genuine)
      {
        // Too few unknowns for a block iteration: the direct path, which returns them all.
        method_ = "tuned";
        return solve_pencil(pencil);
      }

    MPI_Comm comm = MPI_COMM_NULL;
    ALLOYSPEC_CHECK(PetscObjectGetComm(reinterpret_cast<PetscObject>(pencil.K), &comm));
    int ranks = 1;
    MPI_Comm_size(comm, &ranks);
    PetscInt first = 0, last = 0, n_global = 0;
    ALLOYSPEC_CHECK(MatGetOwnershipRange(pencil.K, &first, &last));
    ALLOYSPEC_CHECK(MatGetSize(pencil.K, &n_global, nullptr));

    auto &ws = iterative_[&problem];
    if (!ws)
      ws = std::make_unique<IterativeWorkspace>();
    // Just below min q: the closer σ lies to the wanted eigenvalues, the better
    // the preconditioner approximates (K − λM)⁻¹ there, and K − σM stays
    // positive definite (every eigenvalue is ≥ min q > σ).
    const double sigma = problem.lower_bound - shift_margin(problem);
    ws->amg.setup(pencil.K, pencil.M, sigma);

    const internal::BlockProduct stiffness(pencil.K), mass(pencil.M);
    LobpcgOperator op;
    op.n_local      = static_cast<std::size_t>(last - first);
    op.row_offset   = static_cast<std::size_t>(first);
    op.stiffness    = std::cref(stiffness);
    op.mass         = std::cref(mass);
    op.precondition = [&ws](const double *in, double *out, unsigned int b) { ws->amg.apply(in, out, b); };
    if (ranks > 1)
      op.sum = [comm](double *data, std::size_t count) {
        MPI_Allreduce(MPI_IN_PLACE, data, int(count), MPI_DOUBLE, MPI_SUM, comm);
      };
    op.fixed.resize(op.n_local);
    for (std::size_t i = 0; i < op.n_local; ++i)
      op.fixed[i] = problem.constrained[op.row_offset + i - problem.first_row];

    PetscReal k_norm = 0, m_norm = 0;
    ALLOYSPEC_CHECK(MatNorm(pencil.K, NORM_INFINITY, &k_norm));
    ALLOYSPEC_CHECK(MatNorm(pencil.M, NORM_INFINITY, &m_norm));

    const auto sum = [&op](Eigen::MatrixXd g) {
      if (g.size() > 0)
        op.sum(g.data(), std::size_t(g.size()));
      return g;
    };
    const auto n = static_cast<Eigen::Index>(op.n_local);

    for (unsigned int attempt = 1; attempt <= max_attempts; ++attempt)
      {
        check_block_memory(comm, pencil.K, pencil.M, op.n_local, block, memory_budget_);
        LobpcgSettings ls;
        ls.block_size     = block;
        // The stop rule below replaces the count; it must still fit the block
        // (its default of 10 did not for fewer than 5 wanted pairs).
        ls.n_converged_needed = std::min<unsigned int>(block, static_cast<unsigned int>(wanted) + 1);
        ls.tolerance      = settings_.tolerance;
        ls.max_iterations = max_iterations;
        // Stop once the list up to the first gap at or beyond the wanted count,
        // and the Ritz value just beyond it, have converged.
        ls.stop = [&](const std::vector<double> &theta, const std::vector<double> &res) {
          const std::size_t j = internal::cut_index(theta, wanted);
          const std::size_t upto = j == 0 ? theta.size() - 1 : j;
          for (std::size_t i = 0; i <= upto; ++i)
            if (!(res[i] <= settings_.tolerance))
              return false;
          return true;
        };
        const LobpcgResult found = lobpcg(op, ls);
        const std::size_t  j     = internal::cut_index(found.theta, wanted);
        if (!found.converged || j == 0 || !(found.theta[j] < problem.spurious_threshold()))
          {
            // Not converged, or a cluster reaching the end of the block: a larger block.
            block += block / 2;
            if (3 * std::size_t(block) + 10 > n_genuine)
              break;
            continue;
          }

        // Rayleigh–Ritz again on the first j columns, from freshly applied K
        // and M: exact Ritz pairs of that span (upper bounds), Xᵀ R = 0.
        const Eigen::Map<const Eigen::MatrixXd> x_all(found.vectors.data(), n, block),
          kx_all(found.stiffness.data(), n, block), mx_all(found.mass.data(), n, block);
        const auto           jj = static_cast<Eigen::Index>(j);
        const Eigen::MatrixXd h = sum(x_all.leftCols(jj).transpose() * kx_all.leftCols(jj)),
                              g = sum(x_all.leftCols(jj).transpose() * mx_all.leftCols(jj));
        Eigen::GeneralizedSelfAdjointEigenSolver<Eigen::MatrixXd> ritz(
          0.5 * (h + h.transpose()), 0.5 * (g + g.transpose()));
        if (ritz.info() != Eigen::Success)
          throw std::runtime_error("iterative eigen-solver: the final Rayleigh-Ritz step failed");
        const Eigen::MatrixXd &y  = ritz.eigenvectors();
        const Eigen::MatrixXd  x  = x_all.leftCols(jj) * y;
        const Eigen::MatrixXd  mx = mx_all.leftCols(jj) * y;
        Eigen::MatrixXd        r  = kx_all.leftCols(jj) * y;
        for (Eigen::Index i = 0; i < jj; ++i)
          r.col(i) -= ritz.eigenvalues()[i] * mx.col(i);
        const Eigen::MatrixXd rr = sum(r.transpose() * r);
        Eigen::VectorXd       xx = x.colwise().squaredNorm().transpose(),
                        mm = mx.colwise().squaredNorm().transpose();
        op.sum(xx.data(), std::size_t(xx.size()));
        op.sum(mm.data(), std::size_t(mm.size()));

        const double cut = 0.5 * (found.theta[j - 1] + found.theta[j]);
        EigenResult  result;
        result.complete_up_to    = cut;
        result.solver_iterations = found.iterations;
        result.attempts          = attempt;
        if (countable)
          {
            const std::size_t count = verified_count(pencil, cut);
            if (count != j)
              {
                block += block / 2;
                if (3 * std::size_t(block) + 10 > n_genuine)
                  break;
                continue;
              }
            result.inertia_count = count;
            result.verified_by   = "inertia";
          }
        else
          result.verified_by = "enclosure";

        EnclosureInput enclosure;
        enclosure.nu             = cut;
        enclosure.mass_floor     = problem.mass_floor;
        enclosure.spectrum_floor = problem.lower_bound;
        enclosure.residual_gram.assign(rr.data(), rr.data() + rr.size());
        for (Eigen::Index i = 0; i < jj; ++i)
          {
            const double theta = ritz.eigenvalues()[i];
            enclosure.theta.push_back(theta);
            enclosure.allowance.push_back(rounding_units * std::numeric_limits<double>::epsilon() *
                                          (k_norm + std::abs(theta) * m_norm) * xx[i]);
            result.eigenvalues.push_back(theta);
            result.residuals.push_back(std::sqrt(rr(i, i)) /
                                       (std::max(std::abs(theta), 1.0) * std::sqrt(mm[i])));
            // A distributed mesh keeps each rank's rows (its localisation
            // measures integrate over owned elements); a serial one, whole vectors.
            if (problem.distributed)
              result.eigenvectors.emplace_back(x.col(i).data(), x.col(i).data() + op.n_local);
            else
              result.eigenvectors.push_back(gather_whole(comm, x.col(i).data(), op.n_local,
                                                         static_cast<std::size_t>(n_global)));
          }
        if (problem.mass_floor > 0)
          {
            const Enclosures bounds = enclose(enclosure);
            result.enclosure_lower  = bounds.lower;
            result.enclosure_upper  = bounds.upper;
          }
        if (settings_.energy_cutoff)
          {
            // Only the eigenvalues up to the cutoff (their count was found above).
            result.eigenvalues.resize(wanted);
            result.residuals.resize(wanted);
            result.eigenvectors.resize(wanted);
            if (!result.enclosure_lower.empty())
              {
                result.enclosure_lower.resize(wanted);
                result.enclosure_upper.resize(wanted);
              }
            result.complete_up_to = *settings_.energy_cutoff;
            result.inertia_count  = wanted;
          }
        return result;
      }
    std::ostringstream message;
    message << "iterative eigen-solver: the lowest " << wanted
            << " eigenpairs did not converge to 'spectrum/tolerance' = " << settings_.tolerance
            << (countable ? " with a list confirmed by an inertia count" : "")
            << " within " << max_attempts << " attempts of " << max_iterations
            << " iterations (a tolerance near machine precision times the condition of K may be "
               "out of reach: raise 'spectrum/tolerance', or use 'spectrum/solver' = tuned)";
    throw std::runtime_error(message.str());
  }
} // namespace alloyspec
