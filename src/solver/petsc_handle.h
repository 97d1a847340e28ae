/**
 * @file petsc_handle.h  The one place that owns PETSc/SLEPc objects and turns
 * their error codes into exceptions (solver sources only; nothing above the
 * solver layer sees a PETSc handle except through fe/backend.h).
 */
#pragma once

#include <petscmat.h>
#include <petscsys.h>
#include <petscvec.h>

#include <cstddef>
#include <memory>
#include <stdexcept>
#include <string>

namespace alloyspec::internal
{
  /** Throws for a non-zero PETSc/SLEPc error code, naming the call. */
  inline void petsc_check(PetscErrorCode code, const char *call)
  {
    if (code != 0)
      throw std::runtime_error(std::string("PETSc/SLEPc call failed: ") + call + " (error code " +
                               std::to_string(code) + ")");
  }

  /**
   * Owns one PETSc object handle (Mat, Vec, KSP, EPS, VecScatter) and
   * destroys it with the matching @p destroy when it goes out of scope or is
   * replaced. Movable, not copyable. `&handle` gives the address a PETSc
   * creation routine writes into (any object held before is destroyed first).
   */
  template <typename T, PetscErrorCode (*destroy)(T *)>
  class PetscHandle
  {
  public:
    PetscHandle() = default;
    PetscHandle(const PetscHandle &)            = delete;
    PetscHandle &operator=(const PetscHandle &) = delete;
    PetscHandle(PetscHandle &&other) noexcept
      : handle_(other.handle_)
    {
      other.handle_ = nullptr;
    }
    PetscHandle &operator=(PetscHandle &&other) noexcept
    {
      if (this != std::addressof(other))
        {
          reset();
          handle_       = other.handle_;
          other.handle_ = nullptr;
        }
      return *this;
    }
    ~PetscHandle() { reset(); }

    /** Destroys the object held, if any. Collective for a distributed object. */
    void reset()
    {
      if (handle_)
        destroy(&handle_);
      handle_ = nullptr;
    }
    T        get() const { return handle_; }
    explicit operator bool() const { return handle_ != nullptr; }
    operator T() const { return handle_; }
    T *operator&()
    {
      reset();
      return &handle_;
    }

  private:
    T handle_ = nullptr;
  };

  using OwnedMat     = PetscHandle<Mat, MatDestroy>;
  using OwnedVec     = PetscHandle<Vec, VecDestroy>;
  using OwnedScatter = PetscHandle<VecScatter, VecScatterDestroy>;

  /**
   * A sparse Cholesky (LDLᵀ) factor of @f$K - \sigma M@f$ by MUMPS, the one
   * place this set-up is written. The ordering and symbolic analysis are kept
   * while K (PETSc's object id) and its nonzero pattern stay the same, so a
   * new σ or new potential values cost only a numeric factorisation.
   *
   * With Inertia::counted, MUMPS is set up to report the inertia (null-pivot
   * detection on, ICNTL(24) = 1, and the root node without ScaLAPACK,
   * ICNTL(13) = 1); then negative_pivots() is, by Sylvester's law of inertia,
   * the number of eigenvalues of the pencil (K, M) below σ.
   *
   * Two routes to MUMPS, the same LDLᵀ (SYM = 2) and the same controls:
   * - on one process, MUMPS's own C interface with a nested-dissection
   *   ordering from METIS (METIS_NodeND on the graph of K, handed over as
   *   PERM_IN with ICNTL(7) = 1), which PETSc's interface does not pass for
   *   a Cholesky factor. Measured on K's pattern (tests/benchmarks/
   *   ordering_probe.cc, 35,937 unknowns, Q2, r = 2): entries 13.8M → 12.2M,
   *   operations 1.33e10 → 0.87e10, factorisation 1.64 → 1.05 s, a solve of
   *   8 columns 99 → 80 ms, against MUMPS's own choice among the orderings of
   *   Debian's build (PORD);
   * - on a team of processes, PETSc's MUMPS interface (distributed rows).
   */
  class ShiftedFactor
  {
  public:
    enum class Inertia
    {
      counted,
      not_needed
    };
    explicit ShiftedFactor(Inertia inertia);
    ~ShiftedFactor();
    ShiftedFactor(const ShiftedFactor &)            = delete;
    ShiftedFactor &operator=(const ShiftedFactor &) = delete;

    /** Factorises K − σM (symbolic analysis only when K or its pattern changed). */
    void factorise(Mat K, Mat M, double sigma);
    /** Negative pivots of the last factorisation (Inertia::counted only). */
    std::size_t negative_pivots() const;
    /** Null pivots MUMPS detected in the last factorisation (Inertia::counted only). */
    std::size_t zero_pivots() const;
    /**
     * X = (K − σM)⁻¹ B for the @p columns columns of B: one
     * multi-right-hand-side forward and backward solve, counted (solve_calls(),
     * solved_columns(), factor_passes()). B and X are column-major arrays of
     * this process's rows (leading dimension: its number of rows).
     */
    void solve(const double *rhs, double *solution, unsigned int columns);
    /**
     * Entries in the factor of the last factorisation, MUMPS INFOG(29)
     * ("after factorization: number of entries in the factors", summed over
     * the processes; a negative value counts millions), MUMPS 5.5 user guide,
     * §6 (the INFOG list; the wording from memory, the index as MUMPS's own
     * diagnostic output prints it: "INFOG(29) NUMBER OF ENTRIES IN FACTORS").
     */
    std::size_t factor_entries() const;
    /**
     * Floating-point operations of the last numeric factorisation, MUMPS
     * RINFOG(3) ("operations in node elimination", summed over the processes).
     */
    double last_factorisation_flops() const;
    /**
     * Right-hand sides MUMPS treats in one pass over the factor, at most:
     * |ICNTL(27)| (a negative value asks MUMPS to choose the block itself, up
     * to that size; MUMPS 5.5 user guide, ICNTL(27), from memory). A block
     * solve of b columns therefore passes over the factor at least
     * ⌈b / this⌉ times.
     */
    unsigned int rhs_block() const;
    /** Multi-right-hand-side solve calls so far. */
    std::size_t solve_calls() const { return n_solve_calls_; }
    /** Right-hand sides solved so far. */
    std::size_t solved_columns() const { return n_solved_columns_; }
    /** Σ over solve calls of ⌈b / rhs_block()⌉: lower bound on the passes over the factor. */
    std::size_t factor_passes() const { return n_factor_passes_; }
    /** Seconds spent in solve() so far, and in the last numeric factorisation. */
    double solve_seconds() const { return solve_seconds_; }
    double last_factorisation_seconds() const { return last_factorisation_seconds_; }
    /** Numeric factorisations so far. */
    std::size_t numeric_factorisations() const { return n_numeric_; }
    /** Symbolic analyses so far. */
    std::size_t symbolic_analyses() const { return n_symbolic_; }

  private:
    /** MUMPS through its own C interface, one process (defined in shifted_factor.cc). */
    struct Direct;
    std::unique_ptr<Direct> direct_;
    Inertia          inertia_;
    OwnedMat         shifted_;
    OwnedMat         factor_;
    PetscInt64       k_id_      = -1;
    PetscObjectState pattern_   = 0;
    std::size_t      n_numeric_ = 0, n_symbolic_ = 0;
    std::size_t      n_solve_calls_ = 0, n_solved_columns_ = 0, n_factor_passes_ = 0;
    /** Read once per factor object from MUMPS (0 until then): reading it changes nothing. */
    mutable unsigned int rhs_block_ = 0;
    double           solve_seconds_ = 0, last_factorisation_seconds_ = 0;
  };
} // namespace alloyspec::internal

#define ALLOYSPEC_CHECK(call) ::alloyspec::internal::petsc_check((call), #call)
