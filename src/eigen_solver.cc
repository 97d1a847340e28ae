#include <alloyspec/eigen_solver.h>
#include <alloyspec/errors.h>
#include <alloyspec/inertia_count.h>
#include <alloyspec/spectral_problem.h>

#include <deal.II/base/parameter_handler.h>

#include <petscksp.h>
#include <slepceps.h>

#include <algorithm>
#include <cmath>
#include <numeric>
#include <sstream>
#include <stdexcept>

namespace alloyspec
{
  namespace
  {
    void check(PetscErrorCode code, const char *call)
    {
      if (code != 0)
        throw std::runtime_error(std::string("PETSc/SLEPc call failed: ") + call +
                                 " (error code " + std::to_string(code) + ")");
    }
#define ALLOYSPEC_CHECK(call) check((call), #call)

    /** Owns a PETSc object handle; destroys it with the matching *Destroy. */
    template <typename T, PetscErrorCode (*destroy)(T *)>
    struct Owned
    {
      T handle = nullptr;
      Owned() = default;
      Owned(const Owned &) = delete;
      Owned &operator=(const Owned &) = delete;
      ~Owned()
      {
        if (handle)
          destroy(&handle);
      }
      operator T() const { return handle; }
      T *operator&() { return &handle; }
    };
    using OwnedMat = Owned<Mat, MatDestroy>;
    using OwnedVec = Owned<Vec, VecDestroy>;
    using OwnedEPS = Owned<EPS, EPSDestroy>;

    /** Relative gap below which two eigenvalues count as one cluster (common practice, no source). */
    constexpr double cluster_gap = 1e-8;
    constexpr unsigned int max_attempts = 4;
  } // namespace

  void EigenSolverSettings::declare_parameters(dealii::ParameterHandler &prm)
  {
    prm.enter_subsection("spectrum");
    prm.declare_entry("eigenvalues", "50", dealii::Patterns::Integer(1, 100000),
                      "Number k of lowest eigenvalues per realisation and boundary condition "
                      "(a degenerate cluster at the top is kept whole, so a few more may be "
                      "reported). Ignored when an energy cutoff is set.");
    prm.declare_entry("energy cutoff", "", dealii::Patterns::Anything(),
                      "If not empty: compute all eigenvalues at or below this energy instead of a "
                      "fixed count (their number is first found by an inertia count).");
    prm.declare_entry("tolerance", "1e-12", dealii::Patterns::Double(1e-15, 1e-4),
                      "Relative convergence tolerance of the Krylov-Schur iteration.");
    prm.declare_entry("solver", "tuned", dealii::Patterns::Selection("tuned|baseline"),
                      "tuned: shift below the spectrum, subspace sized for k, no eigenvector "
                      "purification (M is positive definite). baseline: the library's defaults "
                      "with the same shift, for benchmarks.");
    prm.declare_entry("maximum eigenvalues", "5000", dealii::Patterns::Integer(1, 1000000),
                      "Upper limit on the eigenpairs one solve may be asked for (guards the "
                      "energy-cutoff mode against a cutoff far above the band edge).");
    prm.leave_subsection();
  }

  void EigenSolverSettings::parse_parameters(dealii::ParameterHandler &prm)
  {
    prm.enter_subsection("spectrum");
    n_eigenvalues = prm.get_integer("eigenvalues");
    const std::string cutoff = prm.get("energy cutoff");
    energy_cutoff.reset();
    if (cutoff.find_first_not_of(" \t") != std::string::npos)
      {
        std::size_t used = 0;
        double      value = 0;
        try
          {
            value = std::stod(cutoff, &used);
          }
        catch (const std::exception &)
          {
            used = 0;
          }
        if (used == 0 || cutoff.find_first_not_of(" \t", used) != std::string::npos ||
            !std::isfinite(value))
          throw InputError("parameter 'spectrum/energy cutoff': '" + cutoff +
                           "' is not a number (allowed: empty, or a finite real number)");
        energy_cutoff = value;
      }
    tolerance       = prm.get_double("tolerance");
    method          = prm.get("solver");
    max_eigenvalues = prm.get_integer("maximum eigenvalues");
    prm.leave_subsection();
  }

  EigenSolver::EigenSolver(EigenSolverSettings settings)
    : settings_(std::move(settings))
  {}

  EigenSolver::~EigenSolver() = default;

  std::size_t EigenSolver::verified_count(const SpectralProblem &problem, double energy)
  {
    // baseline: a fresh ordering and symbolic factorisation every time.
    if (settings_.method != "tuned")
      return count_below(problem, energy);
    auto &counter = counters_[&problem];
    if (!counter)
      counter = std::make_unique<InertiaCounter>();
    return counter->count_below(problem, energy);
  }

  std::size_t EigenSolver::count_below(const SpectralProblem &problem, double energy)
  {
    const Mat K = problem.K;
    const Mat M = problem.M;
    OwnedMat  shifted;
    ALLOYSPEC_CHECK(MatDuplicate(K, MAT_COPY_VALUES, &shifted));
    ALLOYSPEC_CHECK(MatAXPY(shifted, -energy, M, SAME_NONZERO_PATTERN));
    ALLOYSPEC_CHECK(MatSetOption(shifted, MAT_SYMMETRIC, PETSC_TRUE));
    OwnedMat factor;
    ALLOYSPEC_CHECK(MatGetFactor(shifted, MATSOLVERMUMPS, MAT_FACTOR_CHOLESKY, &factor));
    // MUMPS reports the inertia only with null-pivot detection on and the root
    // node factorised without ScaLAPACK (ICNTL(24) = 1, ICNTL(13) = 1).
    ALLOYSPEC_CHECK(MatMumpsSetIcntl(factor, 13, 1));
    ALLOYSPEC_CHECK(MatMumpsSetIcntl(factor, 24, 1));
    MatFactorInfo info;
    ALLOYSPEC_CHECK(MatFactorInfoInitialize(&info));
    ALLOYSPEC_CHECK(MatCholeskyFactorSymbolic(factor, shifted, nullptr, &info));
    ALLOYSPEC_CHECK(MatCholeskyFactorNumeric(factor, shifted, &info));
    PetscInt n_negative = 0, n_zero = 0, n_positive = 0;
    ALLOYSPEC_CHECK(MatGetInertia(factor, &n_negative, &n_zero, &n_positive));
    return static_cast<std::size_t>(n_negative);
  }

  namespace
  {
    struct RawPairs
    {
      std::vector<double>              values;
      std::vector<std::vector<double>> vectors;
      std::vector<double>              residuals;
      unsigned int                     iterations = 0;
    };

    RawPairs krylov_schur(const SpectralProblem &problem, unsigned int nev, double sigma,
                          const EigenSolverSettings &settings)
    {
      const Mat K = problem.K;
      const Mat M = problem.M;
      PetscInt  n = 0;
      ALLOYSPEC_CHECK(MatGetSize(K, &n, nullptr));
      nev = std::min<unsigned int>(nev, static_cast<unsigned int>(n));

      OwnedEPS eps;
      ALLOYSPEC_CHECK(EPSCreate(PETSC_COMM_SELF, &eps));
      ALLOYSPEC_CHECK(EPSSetOperators(eps, K, M));
      ALLOYSPEC_CHECK(EPSSetProblemType(eps, EPS_GHEP));
      ALLOYSPEC_CHECK(EPSSetType(eps, EPSKRYLOVSCHUR));
      ALLOYSPEC_CHECK(EPSSetWhichEigenpairs(eps, EPS_TARGET_MAGNITUDE));
      ALLOYSPEC_CHECK(EPSSetTarget(eps, sigma));
      ALLOYSPEC_CHECK(EPSSetTolerances(eps, settings.tolerance, 1000));
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
      if (settings.method == "tuned")
        {
          // M is symmetric positive definite, so purification (one extra
          // solve per pair) buys nothing; a subspace of about 2k+20 vectors
          // keeps restarts few without blowing up orthogonalisation cost.
          ALLOYSPEC_CHECK(EPSSetPurify(eps, PETSC_FALSE));
          const PetscInt ncv = std::min<PetscInt>(n, 2 * nev + 20);
          ALLOYSPEC_CHECK(EPSSetDimensions(eps, nev, ncv, PETSC_DEFAULT));
        }
      else
        ALLOYSPEC_CHECK(EPSSetDimensions(eps, nev, PETSC_DEFAULT, PETSC_DEFAULT));
      // Expert tuning through PETSC_OPTIONS (-eps_ncv, -eps_mpd, ...).
      ALLOYSPEC_CHECK(EPSSetFromOptions(eps));
      ALLOYSPEC_CHECK(EPSSolve(eps));

      PetscInt n_converged = 0, iterations = 0;
      ALLOYSPEC_CHECK(EPSGetConverged(eps, &n_converged));
      ALLOYSPEC_CHECK(EPSGetIterationNumber(eps, &iterations));

      RawPairs pairs;
      pairs.iterations = static_cast<unsigned int>(iterations);
      OwnedVec x, kx, mx;
      ALLOYSPEC_CHECK(MatCreateVecs(K, &x, &kx));
      ALLOYSPEC_CHECK(VecDuplicate(x, &mx));
      std::vector<std::pair<double, std::size_t>> order;
      for (PetscInt i = 0; i < n_converged; ++i)
        {
          PetscScalar lambda = 0;
          ALLOYSPEC_CHECK(EPSGetEigenpair(eps, i, &lambda, nullptr, x, nullptr));
          if (!(lambda < 0.5 * problem.spurious_eigenvalue))
            continue; // an eigenvalue of the constrained rows, not of H
          ALLOYSPEC_CHECK(MatMult(K, x, kx));
          ALLOYSPEC_CHECK(MatMult(M, x, mx));
          PetscReal mx_norm = 0, r_norm = 0;
          ALLOYSPEC_CHECK(VecNorm(mx, NORM_2, &mx_norm));
          ALLOYSPEC_CHECK(VecAXPY(kx, -lambda, mx));
          ALLOYSPEC_CHECK(VecNorm(kx, NORM_2, &r_norm));
          const PetscScalar *data = nullptr;
          ALLOYSPEC_CHECK(VecGetArrayRead(x, &data));
          order.emplace_back(lambda, pairs.values.size());
          pairs.values.push_back(lambda);
          pairs.residuals.push_back(r_norm / (std::max(std::abs(lambda), 1.0) * mx_norm));
          pairs.vectors.emplace_back(data, data + n);
          ALLOYSPEC_CHECK(VecRestoreArrayRead(x, &data));
        }
      std::sort(order.begin(), order.end());
      RawPairs sorted;
      sorted.iterations = pairs.iterations;
      for (const auto &[value, index] : order)
        {
          sorted.values.push_back(value);
          sorted.residuals.push_back(pairs.residuals[index]);
          sorted.vectors.push_back(std::move(pairs.vectors[index]));
        }
      return sorted;
    }

    /**
     * Smallest j ≥ k with values[j] clearly above values[j-1], so that the
     * list values[0..j) ends between two clusters; 0 if there is none.
     */
    std::size_t cut_index(const std::vector<double> &values, std::size_t k)
    {
      for (std::size_t j = std::max<std::size_t>(k, 1); j < values.size(); ++j)
        if (values[j] - values[j - 1] > cluster_gap * std::max(1.0, std::abs(values[j])))
          return j;
      return 0;
    }
  } // namespace

  EigenResult EigenSolver::solve(const SpectralProblem &problem)
  {
    // H ≥ min q exactly, and so is its Rayleigh–Ritz approximation: a shift
    // below it makes K − σM positive definite and puts σ next to the wanted end.
    const double sigma = problem.lower_bound - 0.5;

    std::size_t wanted = settings_.n_eigenvalues;
    if (settings_.energy_cutoff)
      {
        wanted = verified_count(problem, *settings_.energy_cutoff);
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
      }

    unsigned int request = static_cast<unsigned int>(wanted + std::max<std::size_t>(5, wanted / 10));
    for (unsigned int attempt = 1; attempt <= max_attempts; ++attempt)
      {
        RawPairs pairs = krylov_schur(problem, request, sigma, settings_);
        // When the whole discrete spectrum was returned (tiny problems), the
        // pushed-out eigenvalue of the constrained rows closes the list.
        const std::size_t n_genuine = static_cast<std::size_t>(
          std::count(problem.constrained.begin(), problem.constrained.end(), false));
        if (pairs.values.size() == n_genuine)
          pairs.values.push_back(problem.spurious_eigenvalue);
        const std::size_t j = cut_index(pairs.values, std::min(wanted, n_genuine));
        if (j >= std::min(wanted, n_genuine) && j > 0)
          {
            const double      cut   = 0.5 * (pairs.values[j - 1] + pairs.values[j]);
            const std::size_t count = verified_count(problem, cut);
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
} // namespace alloyspec
