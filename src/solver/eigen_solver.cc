#include "block_product.h"
#include "iterative_workspace.h"
#include "list_cut.h"
#include "petsc_handle.h"
#include <alloyspec/solver/block_krylov.h>
#include <alloyspec/solver/eigen_solver.h>
#include <alloyspec/core/errors.h>
#include <alloyspec/solver/inertia_counter.h>
#include <alloyspec/fe/spectral_problem.h>
#include <alloyspec/solver/team.h>

#include <deal.II/base/parameter_handler.h>

#include <petscksp.h>
#include <slepceps.h>

#include <algorithm>
#include <chrono>
#include <cmath>
#include <cstring>
#include <limits>
#include <memory>
#include <numeric>
#include <optional>
#include <sstream>
#include <stdexcept>

namespace alloyspec
{
  namespace
  {

    /** The communicator of a matrix: PETSC_COMM_SELF, or the team's. */
    MPI_Comm communicator(Mat A)
    {
      MPI_Comm comm = MPI_COMM_NULL;
      ALLOYSPEC_CHECK(PetscObjectGetComm(reinterpret_cast<PetscObject>(A), &comm));
      return comm;
    }

    using internal::OwnedMat;
    using internal::OwnedVec;
    using OwnedEPS = internal::PetscHandle<EPS, EPSDestroy>;


    using internal::cut_index;
    constexpr unsigned int max_attempts = 4;
    /**
     * "tuned" shift: this fraction of the previous list's width below its
     * lowest eigenvalue (measured, see EigenSolver::solve; no source).
     */
    constexpr double shift_margin = 0.02;
    /**
     * Most eigenvalues below an energy cutoff for which the list is sought
     * with the inertia count's own factor of K − cut·M as the shift
     * (EigenSolver::solve_at_cut); beyond it the shift goes below the
     * spectrum. Measured on the invented binary alloy of
     * binary_alloy_band_edge.prm, L = 8, Dirichlet, time per realisation in
     * units of one numeric factorisation, before (shift below the spectrum,
     * 3 factorisations) and after (1): Q2, r = 1 (4,913 unknowns) with 1
     * eigenvalue below the cutoff 11.1 → 4.0, 4: 12.3 → 5.6, 7: 11.2 → 5.7,
     * 12–13: 14.7 → 7.8, 26: 21.7 → 14.0 (0.75 → 0.62 s, the margin
     * shrinking: the pairs far below the cut converge slowly, their
     * 1/(E_c − λ) being close to the 0 where the unwanted ones accumulate);
     * Q2, r = 2 (35,937 unknowns), 1 eigenvalue: 7.2 → 2.5. Eigenvalues
     * agree with the other path to 5e-16; residuals 1e-12..1e-11 instead of
     * 1e-14 (both far below the 1e-8 the end-to-end checks demand).
     */
    constexpr std::size_t at_cut_limit = 32;
    /**
     * Smallest Krylov basis before a restart at the cut (one vector at a
     * time). Measured on binary_alloy_band_edge.prm, L = 8, Dirichlet, single
     * solves per realisation, 8 realisations (one eigenvalue below 1.3, Q2,
     * r = 1): basis 7 (the default 3k) 20–32, 16 to 64 all 16–20, i.e. no
     * restart at all; 4 eigenvalues below 1.6: 7 → 29–36, 24 or 48 → 25–28;
     * 6–7 below 2.0: 21 → 40–45, 24 → 38–43, 48 → 36–40. A column of the
     * basis costs one n-vector of memory and n·m flops of orthogonalisation
     * per step, little beside a solve.
     */
    constexpr unsigned int at_cut_basis = 48;
  } // namespace

  EigenSolver::EigenSolver(EigenSolverSettings settings)
    : settings_(std::move(settings))
  {}

  /**
   * Kept per problem across realisations: the same Mats K and M are refilled
   * with new values on the same nonzero pattern, so the ST's shifted matrix,
   * the MUMPS ordering and symbolic analysis (0.3-0.9 s at 36k DoFs, Q2,
   * depending on load) and SLEPc's work space are reused; only the numeric
   * factorisation is redone (-log_view: MatCholFctrSym once per problem while
   * σ stays the same, MatCholFctrNum once per realisation).
   */
  struct EigenSolver::Workspace
  {
    OwnedEPS         eps;
    /** PETSc's unique id of the K it was built for, and that K's nonzero state. */
    PetscInt64       k_id    = -1;
    PetscObjectState pattern = 0;
    /** Lowest and highest eigenvalue of the first verified list (shift estimate for later ones). */
    std::optional<double> lowest, highest;
  };

  /**
   * The matrices the solver works on (the problem's own, or the team's
   * distributed copy) and the problem they belong to (constrained rows,
   * bounds, and the key of everything kept across realisations).
   */


  /**
   * The factor of K − σM for the block solver, kept per problem: K and M
   * keep their pattern across realisations, so MUMPS's ordering and symbolic
   * analysis are done once and each realisation only refactorises
   * numerically. It is set up for inertia counts too, and the list check
   * refactorises it at its energy: one analysis and one factor's memory per
   * problem serve both. Measured on one realisation of 8³ cells, k = 50:
   * memory high-water 674 → 621 MiB (Q2, r = 2) and 1129 → 974 MiB (Q4,
   * r = 1), eigen-solver time within noise, eigenvalues identical.
   */
  struct EigenSolver::BlockFactor
  {
    internal::ShiftedFactor shifted{internal::ShiftedFactor::Inertia::counted};
  };

  void EigenSolver::use_teams(RealisationTeams *teams) { teams_ = teams; }

  std::size_t EigenSolver::verified_count(const Pencil &pencil, double energy)
  {
    // baseline: a fresh ordering and symbolic factorisation every time.
    std::size_t negative = 0;
    if (method_ == "baseline")
      {
        InertiaCounter fresh;
        negative = fresh.negative_pivots(backend::MatrixPair{pencil.K, pencil.M}, energy);
        work_.factorisation_flops += fresh.last_factorisation_flops();
        work_.factorisation_seconds += fresh.last_factorisation_seconds();
      }
    else
      {
        // The block solver's factor, refactorised at the energy (numeric only
        // once its analysis is done); the next solve refactorises at σ again,
        // as every realisation does.
        auto &factor = block_factors_[pencil.problem];
        if (!factor)
          factor = std::make_unique<BlockFactor>();
        internal::ShiftedFactor &shared = factor->shifted;
        shared.factorise(pencil.K, pencil.M, energy);
        negative = shared.negative_pivots();
        work_.factorisation_flops += shared.last_factorisation_flops();
        work_.factorisation_seconds += shared.last_factorisation_seconds();
      }
    ++work_.numeric_factorisations;
    // Above μ the constrained rows count too; every genuine eigenvalue is below μ.
    return std::min(negative, pencil.problem->n_genuine());
  }

  namespace
  {
    /**
     * Every process of a problem gets whole eigenvectors (the post-processing
     * integrates over the whole mesh): a gather for a distributed vector.
     */
    class WholeVector
    {
    public:
      explicit WholeVector(Vec like)
      {
        PetscInt n_local = 0;
        ALLOYSPEC_CHECK(VecGetSize(like, &n_));
        ALLOYSPEC_CHECK(VecGetLocalSize(like, &n_local));
        if (n_local != n_)
          ALLOYSPEC_CHECK(VecScatterCreateToAll(like, &to_all_, &whole_));
      }
      std::vector<double> operator()(Vec x)
      {
        Vec source = x;
        if (to_all_)
          {
            ALLOYSPEC_CHECK(VecScatterBegin(to_all_, x, whole_, INSERT_VALUES, SCATTER_FORWARD));
            ALLOYSPEC_CHECK(VecScatterEnd(to_all_, x, whole_, INSERT_VALUES, SCATTER_FORWARD));
            source = whole_;
          }
        const PetscScalar *data = nullptr;
        ALLOYSPEC_CHECK(VecGetArrayRead(source, &data));
        std::vector<double> values(data, data + n_);
        ALLOYSPEC_CHECK(VecRestoreArrayRead(source, &data));
        return values;
      }

    private:
      PetscInt                             n_ = 0;
      internal::OwnedScatter                to_all_;
      OwnedVec                             whole_;
    };

    /**
     * ‖Kx − λMx‖₂ / (max(|λ|, 1) ‖Mx‖₂), the residual every reported pair
     * carries, from @p kx = Kx and @p mx = Mx (@p kx is overwritten).
     */
    double relative_residual(Vec kx, Vec mx, double lambda)
    {
      PetscReal mx_norm = 0, r_norm = 0;
      ALLOYSPEC_CHECK(VecNorm(mx, NORM_2, &mx_norm));
      ALLOYSPEC_CHECK(VecAXPY(kx, -lambda, mx));
      ALLOYSPEC_CHECK(VecNorm(kx, NORM_2, &r_norm));
      return r_norm / (std::max(std::abs(lambda), 1.0) * mx_norm);
    }

    struct RawPairs
    {
      std::vector<double>              values;
      std::vector<std::vector<double>> vectors;
      std::vector<double>              residuals;
      unsigned int                     iterations = 0;
    };

    /** The same pairs in ascending order of their values. */
    RawPairs sorted(RawPairs pairs)
    {
      std::vector<std::size_t> order(pairs.values.size());
      std::iota(order.begin(), order.end(), std::size_t(0));
      std::sort(order.begin(), order.end(),
                [&](std::size_t a, std::size_t b) { return pairs.values[a] < pairs.values[b]; });
      RawPairs result;
      result.iterations = pairs.iterations;
      for (const std::size_t index : order)
        {
          result.values.push_back(pairs.values[index]);
          result.residuals.push_back(pairs.residuals[index]);
          result.vectors.push_back(std::move(pairs.vectors[index]));
        }
      return result;
    }

    /** Krylov–Schur, shift-and-invert, MUMPS Cholesky (LDLᵀ) for the shifted matrix. */
    void configure(EPS eps)
    {
      ALLOYSPEC_CHECK(EPSSetProblemType(eps, EPS_GHEP));
      ALLOYSPEC_CHECK(EPSSetType(eps, EPSKRYLOVSCHUR));
      ALLOYSPEC_CHECK(EPSSetWhichEigenpairs(eps, EPS_TARGET_MAGNITUDE));
      ST st;
      ALLOYSPEC_CHECK(EPSGetST(eps, &st));
      ALLOYSPEC_CHECK(STSetType(st, STSINVERT));
      KSP ksp;
      ALLOYSPEC_CHECK(STGetKSP(st, &ksp));
      ALLOYSPEC_CHECK(KSPSetType(ksp, KSPPREONLY));
      PC pc;
      ALLOYSPEC_CHECK(KSPGetPC(ksp, &pc));
      ALLOYSPEC_CHECK(PCSetType(pc, PCCHOLESKY));
      ALLOYSPEC_CHECK(PCFactorSetMatSolverType(pc, MATSOLVERMUMPS));
    }

    /**
     * Runs Krylov–Schur on @p eps (configured by configure(); a persistent
     * one keeps its ST, KSP and MUMPS analysis from the previous call).
     */
    RawPairs krylov_schur(EPS eps, Mat K, Mat M, const SpectralProblem &problem, unsigned int nev,
                          double sigma, const EigenSolverSettings &settings, SolveWork &work)
    {
      PetscInt  n = 0;
      ALLOYSPEC_CHECK(MatGetSize(K, &n, nullptr));
      nev = std::min<unsigned int>(nev, static_cast<unsigned int>(n));

      // Setting the operators again (same Mat objects, new values) marks the
      // EPS and ST as needing a new set-up, so the shifted matrix is rebuilt
      // and refactorised numerically for this realisation.
      ALLOYSPEC_CHECK(EPSSetOperators(eps, K, M));
      ALLOYSPEC_CHECK(EPSSetTarget(eps, sigma));
      ALLOYSPEC_CHECK(EPSSetTolerances(eps, settings.tolerance, 1000));
      if (settings.method != "baseline") // "tuned", or "auto" resolved to it
        {
          // Purification (SLEPc's default, one extra solve per pair) is kept:
          // measured at L = 8, k = 50, without it the largest residual was
          // 2e-11..6e-11, with it 2e-14..5e-13 like the baseline, for ~58
          // more solves of ~575 over three realisations (time within noise).
          // A subspace of about 2k+20 vectors keeps restarts few without
          // blowing up orthogonalisation cost (ncv 100 and 170 were slower).
          const PetscInt ncv = std::min<PetscInt>(n, 2 * nev + 20);
          ALLOYSPEC_CHECK(EPSSetDimensions(eps, nev, ncv, PETSC_DEFAULT));
        }
      else
        ALLOYSPEC_CHECK(EPSSetDimensions(eps, nev, PETSC_DEFAULT, PETSC_DEFAULT));
      // Expert tuning through PETSC_OPTIONS (-eps_ncv, -eps_mpd, ...).
      ALLOYSPEC_CHECK(EPSSetFromOptions(eps));
      // The ST's KSP (preonly: one solve with the factor per application)
      // counts its solves over its lifetime; the difference is this call's.
      ST  st  = nullptr;
      KSP ksp = nullptr;
      ALLOYSPEC_CHECK(EPSGetST(eps, &st));
      ALLOYSPEC_CHECK(STGetKSP(st, &ksp));
      PetscInt solves_before = 0;
      ALLOYSPEC_CHECK(KSPGetTotalIterations(ksp, &solves_before));
      ALLOYSPEC_CHECK(EPSSolve(eps));

      PetscInt n_converged = 0, iterations = 0;
      ALLOYSPEC_CHECK(EPSGetConverged(eps, &n_converged));
      ALLOYSPEC_CHECK(EPSGetIterationNumber(eps, &iterations));

      RawPairs pairs;
      pairs.iterations = static_cast<unsigned int>(iterations);
      OwnedVec x, kx, mx;
      ALLOYSPEC_CHECK(MatCreateVecs(K, &x, &kx));
      ALLOYSPEC_CHECK(VecDuplicate(x, &mx));
      WholeVector whole(x);
      for (PetscInt i = 0; i < n_converged; ++i)
        {
          PetscScalar lambda = 0;
          ALLOYSPEC_CHECK(EPSGetEigenpair(eps, i, &lambda, nullptr, x, nullptr));
          if (!(lambda < problem.spurious_threshold()))
            continue; // an eigenvalue of the constrained rows, not of H
          ALLOYSPEC_CHECK(MatMult(K, x, kx));
          ALLOYSPEC_CHECK(MatMult(M, x, mx));
          pairs.values.push_back(lambda);
          pairs.residuals.push_back(relative_residual(kx, mx, lambda));
          pairs.vectors.push_back(whole(x));
        }
      // After the eigenvectors: SLEPc's purification applies the factor once more per vector.
      PetscInt solves_after = 0;
      ALLOYSPEC_CHECK(KSPGetTotalIterations(ksp, &solves_after));
      const auto single_solves = static_cast<std::size_t>(solves_after - solves_before);
      work.solve_calls += single_solves;
      work.solved_columns += single_solves;
      work.factor_passes += single_solves;
      // EPSSetOperators above marks the ST for a new set-up: one numeric factorisation per call.
      PC  pc     = nullptr;
      Mat factor = nullptr;
      ALLOYSPEC_CHECK(KSPGetPC(ksp, &pc));
      ALLOYSPEC_CHECK(PCFactorGetMatrix(pc, &factor));
      PetscInt  entries = 0;
      PetscReal flops   = 0;
      ALLOYSPEC_CHECK(MatMumpsGetInfog(factor, 29, &entries));
      ALLOYSPEC_CHECK(MatMumpsGetRinfog(factor, 3, &flops));
      // MUMPS reports a count beyond the integer range as minus the millions.
      work.factor_entries = entries >= 0 ? static_cast<std::size_t>(entries) :
                                           static_cast<std::size_t>(-entries) * std::size_t(1000000);
      ++work.numeric_factorisations;
      work.factorisation_flops += flops;
      work.rhs_block             = 1;
      work.factorisation_seconds = std::numeric_limits<double>::quiet_NaN();
      work.factor_solve_seconds  = std::numeric_limits<double>::quiet_NaN();
      return sorted(std::move(pairs));
    }

    /** Rows of the block vectors a process holds (its rows of K), and the global size. */
    std::pair<PetscInt, PetscInt> local_and_global_rows(Mat K)
    {
      PetscInt n_local = 0, n_global = 0;
      ALLOYSPEC_CHECK(MatGetLocalSize(K, &n_local, nullptr));
      ALLOYSPEC_CHECK(MatGetSize(K, &n_global, nullptr));
      return {n_local, n_global};
    }

    /**
     * Right-hand sides per block solve. Per right-hand side a block of 8
     * costs 1/4.6–1/5.1 of a single solve, 16 costs 1/5.7–1/7.0, 32 costs
     * 1/7.1–1/9.0 (L = 8 and 12, Q2, r = 2), but larger blocks need more
     * columns to converge. Measured at L = 8, time per solve: k = 50 (55
     * wanted) b = 8 8.6 s, 12 9.4 s, 16 9.8 s, 24 11.7 s; k = 200 (220
     * wanted) b = 12 22.4 s, 24 22.3 s, 32 25.5 s, 48 32.0 s, 64 38.9 s.
     */
    unsigned int block_size_for(unsigned int nev)
    {
      return std::clamp(nev / 9, 8u, 24u);
    }
  } // namespace

  namespace
  {
    /**
     * Where σ of block_pairs lies. below_spectrum: a fresh factorisation of
     * K − σM (positive definite), the wanted pairs the largest
     * θ = 1/(λ − σ). at_cut: the factor already holds K − σM at σ = the
     * energy cutoff (the inertia count made it); no new factorisation, and
     * the operator is negated, −T = (σM − K)⁻¹M, whose eigenvalues
     * 1/(σ − λ) are positive exactly for λ < σ, so the wanted pairs (all
     * eigenvalues below the cut) are again its largest.
     */
    enum class ShiftPlace
    {
      below_spectrum,
      at_cut
    };

    /**
     * Block shift-and-invert Krylov–Schur (block_krylov.h) with σ below the
     * spectrum, or at the energy cutoff (ShiftPlace). The residuals are then
     * recomputed from K and M exactly as for the SLEPc path, so both are
     * judged alike.
     */
    RawPairs block_pairs(Mat K, Mat M, const SpectralProblem &problem, EigenSolver::BlockFactor &f,
                         unsigned int nev, double sigma, const EigenSolverSettings &settings,
                         SolveWork &work, ShiftPlace place = ShiftPlace::below_spectrum)
    {
      const MPI_Comm comm = communicator(K);
      if (place == ShiftPlace::below_spectrum)
        {
          f.shifted.factorise(K, M, sigma);
          ++work.numeric_factorisations;
          work.factorisation_flops += f.shifted.last_factorisation_flops();
          work.factorisation_seconds += f.shifted.last_factorisation_seconds();
        }
      work.factor_entries = f.shifted.factor_entries();
      work.rhs_block      = f.shifted.rhs_block();
      const double solve_seconds_before = f.shifted.solve_seconds();
      const std::size_t calls_before   = f.shifted.solve_calls();
      const std::size_t columns_before = f.shifted.solved_columns();
      const std::size_t passes_before  = f.shifted.factor_passes();


      const auto [n_local, n_global] = local_and_global_rows(K);
      PetscInt first_row = 0;
      ALLOYSPEC_CHECK(MatGetOwnershipRange(K, &first_row, nullptr));
      PetscMPIInt ranks = 1;
      MPI_Comm_size(comm, &ranks);

      BlockOperator op;
      op.n_local    = static_cast<std::size_t>(n_local);
      op.row_offset = static_cast<std::size_t>(first_row);
      op.solve = [&](const double *in, double *out, unsigned int b) {
        f.shifted.solve(in, out, b);
        if (place == ShiftPlace::at_cut)
          for (std::size_t i = 0; i < op.n_local * b; ++i)
            out[i] = -out[i];
      };
      // M times a block reads M once for the block (block_product.h).
      const internal::BlockProduct mass(M);
      op.mass = std::cref(mass);
      if (ranks > 1)
        op.sum = [comm](double *data, std::size_t count) {
          MPI_Allreduce(MPI_IN_PLACE, data, int(count), MPI_DOUBLE, MPI_SUM, comm);
        };

      BlockKrylovSettings block;
      block.n_wanted   = std::min<unsigned int>(nev, static_cast<unsigned int>(n_global));
      // At the cut, one vector at a time. A handful of pairs below the cut
      // converge in a few dozen single solves, while a block of 8 (the
      // smallest above) spends most of its columns on directions the
      // handful does not need. Measured, binary_alloy_band_edge.prm,
      // Dirichlet, time per realisation in numeric factorisations, block 1
      // against 8 (columns solved in brackets): L = 6, Q2, r = 1, tilted
      // realisations with 1 eigenvalue below 1.3: 2.3 (15) against 4.3 (73);
      // L = 8, r = 1: 1 below the cut 2.6 (22–35) against 4.0 (89–121),
      // 4 below: 3.1–4.3 (30–37) against 4.2–5.7 (132–140), 17 below:
      // 5.4–7.2 (78–85) against 9.3–12.2 (281–321); L = 8, r = 2 (35,937
      // unknowns), where a block of 8 costs only 1.6 single solves: 1 below
      // 2.5–3.1 against 2.3–2.9, 12–13 below 5.3–5.9 against 7.8; blocks of
      // 2 and 4 were no faster there and once took 192 and 3,430 columns.
      block.block_size = place == ShiftPlace::at_cut ? 1u : block_size_for(block.n_wanted);
      // At the cut, a basis of at least at_cut_basis columns before the first
      // restart: the default 3k (7 columns for one pair) restarted every five
      // solves and lost the Krylov space that single-vector Lanczos needs.
      // (A small problem keeps what fits: a basis and one block, at most its unknowns.)
      if (place == ShiftPlace::at_cut)
        block.max_basis = std::max(
          3 * block.n_wanted,
          static_cast<unsigned int>(std::min<PetscInt>(at_cut_basis, std::max<PetscInt>(n_global - 1, 0))));
      // At the cut, exactly the wanted pairs have θ > 0: a pair beyond them
      // would be one above the cut, which the check below rejects anyway.
      block.tolerance  = settings.tolerance;
      BlockKrylovResult found = block_krylov_schur(op, block);
      // Purification, one more application of T to every Ritz vector: the
      // Krylov–Schur test bounds ‖T x − θ x‖_M, which becomes a residual up to
      // ‖K − σM‖/θ larger in K x − λ M x; x ← T x (with λ from the Rayleigh
      // quotient) brings that down to the level of SLEPc's own purified
      // vectors (measured at L = 8, k = 50: largest residual 6e-10 without,
      // see the e2e residual check for with). In blocks, so cheap.
      {
        const std::size_t n_pairs = found.theta.size();
        std::vector<double> image(op.n_local * block.block_size);
        for (std::size_t first = 0; first < n_pairs; first += block.block_size)
          {
            const unsigned int b =
              static_cast<unsigned int>(std::min<std::size_t>(block.block_size, n_pairs - first));
            double *columns = found.vectors.data() + first * op.n_local;
            op.mass(columns, image.data(), b);
            op.solve(image.data(), columns, b);
          }
      }
      work.solve_calls += f.shifted.solve_calls() - calls_before;
      work.solved_columns += f.shifted.solved_columns() - columns_before;
      work.factor_passes += f.shifted.factor_passes() - passes_before;
      work.factor_solve_seconds += f.shifted.solve_seconds() - solve_seconds_before;

      OwnedVec x, kx, mx;
      ALLOYSPEC_CHECK(MatCreateVecs(K, &x, &kx));
      ALLOYSPEC_CHECK(VecDuplicate(x, &mx));
      WholeVector whole(x);
      RawPairs unsorted;
      unsorted.iterations = found.restarts;
      for (std::size_t i = 0; i < found.theta.size(); ++i)
        {
          PetscScalar *local = nullptr;
          ALLOYSPEC_CHECK(VecGetArray(x, &local));
          std::memcpy(local, found.vectors.data() + i * op.n_local, sizeof(double) * op.n_local);
          ALLOYSPEC_CHECK(VecRestoreArray(x, &local));
          ALLOYSPEC_CHECK(MatMult(K, x, kx));
          ALLOYSPEC_CHECK(MatMult(M, x, mx));
          PetscScalar xkx = 0, xmx = 0;
          ALLOYSPEC_CHECK(VecDot(x, kx, &xkx));
          ALLOYSPEC_CHECK(VecDot(x, mx, &xmx));
          // M-normalised, like SLEPc's vectors.
          const double scale = 1.0 / std::sqrt(xmx);
          ALLOYSPEC_CHECK(VecScale(x, scale));
          ALLOYSPEC_CHECK(VecScale(kx, scale));
          ALLOYSPEC_CHECK(VecScale(mx, scale));
          const double lambda = xkx / xmx;
          if (!(lambda < problem.spurious_threshold()))
            continue;
          unsorted.values.push_back(lambda);
          unsorted.residuals.push_back(relative_residual(kx, mx, lambda));
          unsorted.vectors.push_back(whole(x));
        }
      // Rayleigh quotients may swap within a cluster.
      return sorted(std::move(unsorted));
    }

  } // namespace

  EigenResult EigenSolver::solve(const SpectralProblem &problem)
  {
    if (std::find(first_solved_.begin(), first_solved_.end(), &problem) == first_solved_.end())
      first_solved_.push_back(&problem);
    Pencil pencil{problem.stiffness(), problem.mass(), &problem};
    // A distributed mesh's pencil is already spread over its team.
    if (teams_ && teams_->size() > 1 && !problem.distributed)
      {
        const backend::MatrixPair copy = teams_->distributed(problem);
        pencil.K = copy.K;
        pencil.M = copy.M;
      }
    const auto start = std::chrono::steady_clock::now();
    work_            = SolveWork{};
    method_          = method_for(problem);
    EigenResult result = method_ == "iterative" ? solve_iterative(pencil) : solve_pencil(pencil);
    result.method      = method_;
    result.work         = work_;
    result.work.seconds = std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count();
    return result;
  }

  std::optional<EigenResult> EigenSolver::solve_at_cut(const Pencil &pencil, const std::size_t wanted)
  {
    const SpectralProblem &problem = *pencil.problem;
    const double           cut     = *settings_.energy_cutoff;
    auto                  &factor  = block_factors_[&problem];
    // verified_count() has just factorised K − cut·M in this factor; a zero
    // pivot (the cut on an eigenvalue to rounding) leaves no usable solve.
    if (!factor || factor->shifted.zero_pivots() > 0)
      return std::nullopt;
    RawPairs pairs;
    try
      {
        pairs = block_pairs(pencil.K, pencil.M, problem, *factor, static_cast<unsigned int>(wanted),
                            cut, settings_, work_, ShiftPlace::at_cut);
      }
    catch (const std::invalid_argument &)
      {
        return std::nullopt; // too few unknowns for a block basis
      }
    // The check of the list, exactly as for a cut between two returned
    // eigenvalues: `wanted` pairs, every Rayleigh quotient below the cut by
    // more than the cluster gap that cut_index() demands of any cut, and the
    // negative pivots at the cut (counted by the same factorisation) equal to
    // their number.
    const double gap = internal::cluster_gap * std::max(1.0, std::abs(cut));
    if (pairs.values.size() != wanted || !(pairs.values.back() < cut - gap))
      return std::nullopt;
    EigenResult result;
    result.eigenvalues       = std::move(pairs.values);
    result.residuals         = std::move(pairs.residuals);
    result.eigenvectors      = std::move(pairs.vectors);
    result.complete_up_to    = cut;
    result.inertia_count     = wanted;
    result.solver_iterations = pairs.iterations;
    result.attempts          = 1;
    return result;
  }

  EigenResult EigenSolver::solve_pencil(const Pencil &pencil)
  {
    const SpectralProblem &problem = *pencil.problem;
    Workspace *workspace = nullptr; // set by run_krylov_schur ("tuned" only)
    // H ≥ min q exactly, and so is its Rayleigh–Ritz approximation: a shift
    // below it makes K − σM positive definite and puts σ next to the wanted end.
    const double safe_sigma = problem.lower_bound - 0.5;
    // One Krylov–Schur solve for nev pairs nearest sigma ("tuned": the block
    // solver at the safe shift whenever the problem is large enough for it).
    // The last attempt uses the single-vector path, an independent second opinion.
    bool       allow_block = true;
    const auto run_krylov_schur = [this, &pencil, &problem, &workspace, safe_sigma,
                                   &allow_block](unsigned int nev, double sigma) -> RawPairs
    {
      if (method_ == "tuned" && allow_block)
        {
          auto &factor = block_factors_[&problem];
          if (!factor)
            factor = std::make_unique<BlockFactor>();
          try
            {
              return block_pairs(pencil.K, pencil.M, problem, *factor, nev, safe_sigma, settings_,
                                 work_);
            }
          catch (const std::invalid_argument &)
            {
              // Too few unknowns for a block basis: the single-vector path below.
            }
        }
      if (method_ != "tuned")
        {
          // baseline: fresh objects, so a fresh ordering and symbolic analysis.
          OwnedEPS eps;
          ALLOYSPEC_CHECK(EPSCreate(communicator(pencil.K), &eps));
          configure(eps);
          return krylov_schur(eps, pencil.K, pencil.M, problem, nev, sigma, settings_, work_);
        }
      PetscInt64       k_id    = -1;
      PetscObjectState pattern = 0;
      ALLOYSPEC_CHECK(PetscObjectGetId(reinterpret_cast<PetscObject>(pencil.K), &k_id));
      ALLOYSPEC_CHECK(MatGetNonzeroState(pencil.K, &pattern));
      auto &ws = workspaces_[&problem];
      // Another matrix (or a changed pattern): start afresh.
      if (ws && (ws->k_id != k_id || ws->pattern != pattern))
        ws.reset();
      if (!ws)
        {
          ws          = std::make_unique<Workspace>();
          ws->k_id    = k_id;
          ws->pattern = pattern;
          ALLOYSPEC_CHECK(EPSCreate(communicator(pencil.K), &ws->eps));
          configure(ws->eps);
          // K and M share one pattern, so the ST's copy of K − σM keeps its
          // pattern and MUMPS's symbolic analysis stays valid for every
          // realisation. (A change of σ still made SLEPc redo it, measured.)
          ST st;
          ALLOYSPEC_CHECK(EPSGetST(ws->eps, &st));
          ALLOYSPEC_CHECK(STSetMatStructure(st, SAME_NONZERO_PATTERN));
        }
      workspace = ws.get();
      return krylov_schur(ws->eps, pencil.K, pencil.M, problem, nev, sigma, settings_, work_);
    };

    // "tuned" (single-vector path): the first attempt shifts to just below the first verified
    // realisation's lowest eigenvalue instead. Measured (L = 8, Q2, r = 2,
    // 35,937 DoFs, k = 50, λ₁ ≈ 0.73, λ₅₀ ≈ 4.7, min q = 0), shift-invert
    // solves per realisation: without purification σ = −0.5 (safe) 220,
    // σ = 0.3 217, σ anywhere in [0.6, 1.0] 177 (one restart fewer); with
    // purification (kept, see krylov_schur) σ = −0.5 277, σ = 0.65 235, the
    // baseline 281. A shift in the middle of the wanted range (σ = 2.7) needed
    // 131 (188 with purification) but left residuals of up to 2e-9 at the
    // ends of the list without purification, even with a tolerance of 1e-14,
    // and 3e-11 with it (vs 5e-13), so it is not used. A shift that lands
    // above the new λ₁ is harmless: MUMPS
    // factorises the indefinite K − σM as LDLᵀ and the inertia check below
    // verifies the list whatever σ was; a failed attempt falls back to the
    // safe shift.
    std::optional<double> estimated_sigma;
    if (method_ == "tuned")
      {
        const auto it = workspaces_.find(&problem);
        if (it != workspaces_.end() && it->second && it->second->lowest && it->second->highest)
          estimated_sigma = std::max(safe_sigma, *it->second->lowest -
                                                   shift_margin * (*it->second->highest -
                                                                   *it->second->lowest));
      }

    std::size_t wanted = settings_.n_eigenvalues;
    if (settings_.energy_cutoff)
      {
        wanted = verified_count(pencil, *settings_.energy_cutoff);
        if (wanted > settings_.max_eigenvalues)
          throw InputError("parameter 'spectrum/energy cutoff': " +
                           std::to_string(wanted) + " eigenvalues lie below the cutoff " +
                           std::to_string(*settings_.energy_cutoff) +
                           ", more than 'spectrum/maximum eigenvalues' = " +
                           std::to_string(settings_.max_eigenvalues) +
                           " (lower the cutoff or raise the limit)");
        if (wanted == 0)
          {
            EigenResult empty;
            empty.complete_up_to = *settings_.energy_cutoff;
            return empty;
          }
        if (method_ == "tuned" && wanted <= at_cut_limit)
          if (std::optional<EigenResult> found = solve_at_cut(pencil, wanted))
            return std::move(*found);
      }

    unsigned int request = static_cast<unsigned int>(wanted + std::max<std::size_t>(5, wanted / 10));
    for (unsigned int attempt = 1; attempt <= max_attempts; ++attempt)
      {
        RawPairs pairs;
        allow_block = attempt < max_attempts;
        if (attempt == 1 && estimated_sigma)
          {
            try
              {
                pairs = run_krylov_schur(request, *estimated_sigma);
              }
            catch (const std::runtime_error &)
              {
                // e.g. σ hit an eigenvalue exactly (a singular factor):
                // the safe shift cannot fail that way.
                pairs = run_krylov_schur(request, safe_sigma);
              }
          }
        else
          pairs = run_krylov_schur(request, safe_sigma);
        // When the whole discrete spectrum was returned (tiny problems), the
        // pushed-out eigenvalue of the constrained rows closes the list.
        const std::size_t n_genuine = problem.n_genuine();
        if (pairs.values.size() == n_genuine)
          pairs.values.push_back(problem.spurious_eigenvalue);
        const std::size_t j = cut_index(pairs.values, std::min(wanted, n_genuine));
        if (j >= std::min(wanted, n_genuine) && j > 0)
          {
            const double      cut   = 0.5 * (pairs.values[j - 1] + pairs.values[j]);
            const std::size_t count = verified_count(pencil, cut);
            if (count == j)
              {
                EigenResult result;
                std::size_t keep = j;
                result.complete_up_to = cut;
                if (settings_.energy_cutoff)
                  {
                    keep = wanted;
                    result.complete_up_to = *settings_.energy_cutoff;
                  }
                result.eigenvalues.assign(pairs.values.begin(), pairs.values.begin() + keep);
                result.residuals.assign(pairs.residuals.begin(), pairs.residuals.begin() + keep);
                result.eigenvectors.assign(std::make_move_iterator(pairs.vectors.begin()),
                                           std::make_move_iterator(pairs.vectors.begin() + keep));
                result.inertia_count     = settings_.energy_cutoff ? wanted : count;
                result.solver_iterations = pairs.iterations;
                result.attempts          = attempt;
                // Set once, from the first verified list: every change of σ
                // made SLEPc redo MUMPS's symbolic analysis (-log_view:
                // MatCholFctrSym 4 instead of 2 over three realisations),
                // and λ₁ fluctuates little between realisations.
                if (workspace && keep > 0 && !workspace->lowest)
                  {
                    workspace->lowest  = result.eigenvalues.front();
                    workspace->highest = result.eigenvalues.back();
                  }
                return result;
              }
          }
        request = request + request / 2 + 10;
      }
    std::ostringstream message;
    message << "eigen-solver: after " << max_attempts
            << " attempts the Krylov-Schur eigenvalues could not be confirmed by an inertia count "
               "(wanted "
            << wanted << "); refusing to report an incomplete list";
    throw std::runtime_error(message.str());
  }
  // Here, where BlockFactor is complete.
  EigenSolver::~EigenSolver()
  {
    for (const SpectralProblem *problem : first_solved_)
      {
        workspaces_.erase(problem);
        block_factors_.erase(problem);
        iterative_.erase(problem);
      }
  }
} // namespace alloyspec
