#include "petsc_handle.h"

#include <dmumps_c.h>
#include <metis.h>
#include <mpi.h>

#include <algorithm>
#include <chrono>
#include <cstring>
#include <string>
#include <vector>

namespace alloyspec::internal
{
  namespace
  {
    /**
     * Unknowns from which the one-process factor is ordered by METIS. Below
     * it the factor costs milliseconds whatever the ordering, and MUMPS's own
     * choice stays, the factor the memory model of direct_path_model.h was
     * fitted to (through PETSc's interface; the same ordering and factor
     * through MUMPS's own). Measured against that model, whose
     * fitted factors spread over 0.64–1 of it: METIS's factor was 0.49 of it
     * at 729 unknowns (Q2, 4³ cells), and 0.76, 0.80, 0.84 and 0.85 at
     * 15,625, 35,937 (Q2 and Q4) and 117,649 unknowns.
     */
    constexpr PetscInt metis_from = 10000;

    /** MUMPS reports a count beyond the integer range as minus the millions. */
    std::size_t mumps_count(const MUMPS_INT value)
    {
      return value >= 0 ? static_cast<std::size_t>(value) :
                          static_cast<std::size_t>(-static_cast<long long>(value)) * std::size_t(1000000);
    }

    double seconds_since(const std::chrono::steady_clock::time_point start)
    {
      return std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count();
    }

    /** The rows of a sequential AIJ matrix (0-based CSR), released on destruction. */
    class RowStructure
    {
    public:
      explicit RowStructure(Mat A)
        : a_(A)
      {
        ALLOYSPEC_CHECK(MatGetRowIJ(A, 0, PETSC_FALSE, PETSC_FALSE, &n_, &ia_, &ja_, &done_));
        if (!done_)
          throw std::runtime_error("ShiftedFactor: the row structure of the matrix is not available");
      }
      ~RowStructure() { MatRestoreRowIJ(a_, 0, PETSC_FALSE, PETSC_FALSE, &n_, &ia_, &ja_, &done_); }
      RowStructure(const RowStructure &)            = delete;
      RowStructure &operator=(const RowStructure &) = delete;
      PetscInt        n() const { return n_; }
      const PetscInt *ia() const { return ia_; }
      const PetscInt *ja() const { return ja_; }

    private:
      Mat             a_;
      PetscInt        n_ = 0;
      const PetscInt *ia_ = nullptr, *ja_ = nullptr;
      PetscBool       done_ = PETSC_FALSE;
    };
  } // namespace

  /**
   * The factor held by MUMPS's own C interface (one process). K and M share
   * one nonzero pattern (checked at the analysis), so K − σM is formed
   * entry by entry on the upper triangle that MUMPS reads for SYM = 2.
   */
  struct ShiftedFactor::Direct
  {
    DMUMPS_STRUC_C      id{};
    bool                initialised = false;
    std::vector<MUMPS_INT> irn, jcn, perm_in;
    /** Position in PETSc's value array of every upper-triangle entry given to MUMPS. */
    std::vector<PetscInt> position;
    std::vector<double>   values;
    PetscInt              n = 0;

    ~Direct()
    {
      if (initialised)
        {
          id.job = -2;
          dmumps_c(&id);
        }
    }

    void call(const int job, const char *what)
    {
      id.job = job;
      dmumps_c(&id);
      if (id.infog[0] < 0)
        throw std::runtime_error(std::string("MUMPS ") + what + " failed: INFOG(1) = " +
                                 std::to_string(id.infog[0]) + ", INFOG(2) = " +
                                 std::to_string(id.infog[1]));
    }

    /**
     * Pattern, ordering (METIS's nested dissection when @p metis, else
     * MUMPS's own choice) and MUMPS's symbolic analysis of K − σM.
     */
    void analyse(Mat K, Mat M, MPI_Comm comm, const bool inertia, const bool metis)
    {
      const RowStructure k(K), m(M);
      n = k.n();
      if (m.n() != n || !std::equal(k.ia(), k.ia() + n + 1, m.ia()) ||
          !std::equal(k.ja(), k.ja() + k.ia()[n], m.ja()))
        throw std::logic_error("ShiftedFactor: K and M must share one nonzero pattern");
      irn.clear();
      jcn.clear();
      position.clear();
      // METIS's graph: every off-diagonal entry, both triangles (METIS 5.1
      // manual, §5.5 "Graph data structure" — from memory).
      // Built only when METIS orders the factor (below metis_from MUMPS orders it).
      std::vector<idx_t> xadj(metis ? std::size_t(n) + 1 : 0, 0), adjncy;
      if (metis)
        adjncy.reserve(std::size_t(k.ia()[n]));
      for (PetscInt i = 0; i < n; ++i)
        {
          for (PetscInt t = k.ia()[i]; t < k.ia()[i + 1]; ++t)
            {
              const PetscInt j = k.ja()[t];
              if (metis && j != i)
                adjncy.push_back(idx_t(j));
              if (j >= i)
                {
                  irn.push_back(MUMPS_INT(i + 1));
                  jcn.push_back(MUMPS_INT(j + 1));
                  position.push_back(t);
                }
            }
          if (metis)
            xadj[std::size_t(i) + 1] = idx_t(adjncy.size());
        }
      values.assign(position.size(), 0.0);
      if (metis)
        order_by_metis(xadj, adjncy);
      else
        perm_in.clear();

      if (initialised)
        {
          id.job = -2;
          dmumps_c(&id);
          initialised = false;
        }
      id              = DMUMPS_STRUC_C{};
      id.comm_fortran = MUMPS_INT(MPI_Comm_c2f(comm));
      id.par          = 1;
      id.sym          = 2; // symmetric, indefinite allowed: LDLᵀ with pivoting, as PETSc's Cholesky
      call(-1, "initialisation");
      initialised    = true;
      id.icntl[0]    = -1; // no error, diagnostic or global output
      id.icntl[1]    = -1;
      id.icntl[2]    = -1;
      id.icntl[3]    = 0;
      if (!perm_in.empty())
        id.icntl[6] = 1; // ICNTL(7) = 1: the ordering is PERM_IN
      id.icntl[11]   = 1; // ICNTL(12) = 1: the usual ordering, not a compressed graph
      if (inertia)
        {
          id.icntl[12] = 1; // ICNTL(13): root node without ScaLAPACK, so INFOG(12) counts every pivot
          id.icntl[23] = 1; // ICNTL(24): null-pivot detection, INFOG(28)
        }
      id.n       = MUMPS_INT(n);
      id.nnz     = MUMPS_INT8(irn.size());
      id.irn     = irn.data();
      id.jcn     = jcn.data();
      id.a       = values.data();
      id.perm_in = perm_in.empty() ? nullptr : perm_in.data();
      call(1, "analysis");
    }

    /** PERM_IN from METIS's nested dissection of the graph (xadj, adjncy). */
    void order_by_metis(std::vector<idx_t> &xadj, std::vector<idx_t> &adjncy)
    {
      idx_t              vertices = idx_t(n);
      std::vector<idx_t> perm(static_cast<std::size_t>(n)), iperm(static_cast<std::size_t>(n));
      idx_t              options[METIS_NOPTIONS];
      METIS_SetDefaultOptions(options);
      if (n > 0 && METIS_NodeND(&vertices, xadj.data(), adjncy.data(), nullptr, options, perm.data(),
                                iperm.data()) != METIS_OK)
        throw std::runtime_error("ShiftedFactor: METIS_NodeND failed");
      // PERM_IN(i): the position of variable i in the pivot order (1-based);
      // METIS's iperm[i] is that position, 0-based (MUMPS 5.5 user guide,
      // ICNTL(7); METIS 5.1 manual, METIS_NodeND — both from memory).
      perm_in.resize(std::size_t(n));
      for (PetscInt i = 0; i < n; ++i)
        perm_in[std::size_t(i)] = MUMPS_INT(iperm[std::size_t(i)] + 1);
    }

    void factorise(Mat K, Mat M, const double sigma)
    {
      const PetscScalar *k = nullptr, *m = nullptr;
      ALLOYSPEC_CHECK(MatSeqAIJGetArrayRead(K, &k));
      ALLOYSPEC_CHECK(MatSeqAIJGetArrayRead(M, &m));
      for (std::size_t t = 0; t < position.size(); ++t)
        values[t] = k[position[t]] - sigma * m[position[t]];
      ALLOYSPEC_CHECK(MatSeqAIJRestoreArrayRead(M, &m));
      ALLOYSPEC_CHECK(MatSeqAIJRestoreArrayRead(K, &k));
      id.a = values.data();
      call(2, "numeric factorisation");
    }

    /** solution = (K − σM)⁻¹ rhs: MUMPS solves in place on a dense, centralised block. */
    void solve(const double *in, double *out, const unsigned int columns)
    {
      if (out != in)
        std::memcpy(out, in, sizeof(double) * std::size_t(n) * columns);
      id.icntl[19] = 0; // ICNTL(20) = 0: dense right-hand sides
      id.rhs       = out;
      id.nrhs      = MUMPS_INT(columns);
      id.lrhs      = MUMPS_INT(n);
      call(3, "solve");
    }
  };

  ShiftedFactor::ShiftedFactor(const Inertia inertia)
    : inertia_(inertia)
  {}

  ShiftedFactor::~ShiftedFactor() = default;

  void ShiftedFactor::factorise(const Mat K, const Mat M, const double sigma)
  {
    MatFactorInfo info;
    ALLOYSPEC_CHECK(MatFactorInfoInitialize(&info));
    PetscInt64       k_id    = -1;
    PetscObjectState pattern = 0;
    ALLOYSPEC_CHECK(PetscObjectGetId(reinterpret_cast<PetscObject>(K), &k_id));
    ALLOYSPEC_CHECK(MatGetNonzeroState(K, &pattern));
    MPI_Comm comm = MPI_COMM_NULL;
    ALLOYSPEC_CHECK(PetscObjectGetComm(reinterpret_cast<PetscObject>(K), &comm));
    int processes = 1;
    MPI_Comm_size(comm, &processes);
    PetscInt rows = 0;
    ALLOYSPEC_CHECK(MatGetSize(K, &rows, nullptr));
    // The direct route reads PETSc's sequential storage (a distributed mesh's
    // matrices may be of the parallel type even on a team of one).
    PetscBool k_sequential = PETSC_FALSE, m_sequential = PETSC_FALSE;
    ALLOYSPEC_CHECK(PetscObjectTypeCompare(reinterpret_cast<PetscObject>(K), MATSEQAIJ, &k_sequential));
    ALLOYSPEC_CHECK(PetscObjectTypeCompare(reinterpret_cast<PetscObject>(M), MATSEQAIJ, &m_sequential));
    // Another matrix (or a changed pattern): the analysis must be redone.
    if ((!factor_ && !direct_) || k_id != k_id_ || pattern != pattern_)
      {
        factor_.reset();
        shifted_.reset();
        direct_.reset();
        rhs_block_ = 0;
        k_id_      = k_id;
        pattern_   = pattern;
        // One process: MUMPS's own interface at every size, which also
        // spares each solve PETSc's dense wrappers (at 1,331 unknowns these
        // and the products around them cost as much as the solves).
        if (processes == 1 && k_sequential && m_sequential)
          {
            direct_ = std::make_unique<Direct>();
            direct_->analyse(K, M, comm, inertia_ == Inertia::counted, rows >= metis_from);
          }
        else
          {
            ALLOYSPEC_CHECK(MatDuplicate(K, MAT_COPY_VALUES, &shifted_));
            ALLOYSPEC_CHECK(MatSetOption(shifted_, MAT_SYMMETRIC, PETSC_TRUE));
            ALLOYSPEC_CHECK(MatGetFactor(shifted_, MATSOLVERMUMPS, MAT_FACTOR_CHOLESKY, &factor_));
            if (inertia_ == Inertia::counted)
              {
                ALLOYSPEC_CHECK(MatMumpsSetIcntl(factor_, 13, 1));
                ALLOYSPEC_CHECK(MatMumpsSetIcntl(factor_, 24, 1));
              }
            ALLOYSPEC_CHECK(MatCholeskyFactorSymbolic(factor_, shifted_, nullptr, &info));
          }
        ++n_symbolic_;
      }
    // Same pattern as K (and M): only values change, the analysis stays valid.
    const auto start = std::chrono::steady_clock::now();
    if (direct_)
      direct_->factorise(K, M, sigma);
    else
      {
        ALLOYSPEC_CHECK(MatCopy(K, shifted_, SAME_NONZERO_PATTERN));
        ALLOYSPEC_CHECK(MatAXPY(shifted_, -sigma, M, SAME_NONZERO_PATTERN));
        ALLOYSPEC_CHECK(MatCholeskyFactorNumeric(factor_, shifted_, &info));
      }
    last_factorisation_seconds_ = seconds_since(start);
    ++n_numeric_;
  }

  void ShiftedFactor::solve(const double *rhs, double *solution, const unsigned int columns)
  {
    const auto start = std::chrono::steady_clock::now();
    if (direct_)
      direct_->solve(rhs, solution, columns);
    else
      {
        // Dense views of the caller's arrays on the factor's row layout.
        MPI_Comm comm = MPI_COMM_NULL;
        ALLOYSPEC_CHECK(PetscObjectGetComm(reinterpret_cast<PetscObject>(shifted_.get()), &comm));
        PetscInt n_local = 0, n_global = 0;
        ALLOYSPEC_CHECK(MatGetLocalSize(shifted_, &n_local, nullptr));
        ALLOYSPEC_CHECK(MatGetSize(shifted_, &n_global, nullptr));
        OwnedMat in, out;
        ALLOYSPEC_CHECK(MatCreateDense(comm, n_local, PETSC_DECIDE, n_global, PetscInt(columns),
                                       const_cast<PetscScalar *>(rhs), &in));
        ALLOYSPEC_CHECK(MatCreateDense(comm, n_local, PETSC_DECIDE, n_global, PetscInt(columns),
                                       solution, &out));
        ALLOYSPEC_CHECK(MatMatSolve(factor_, in, out));
      }
    solve_seconds_ += seconds_since(start);
    const unsigned int block = rhs_block();
    ++n_solve_calls_;
    n_solved_columns_ += columns;
    n_factor_passes_ += (columns + block - 1) / block;
  }

  std::size_t ShiftedFactor::factor_entries() const
  {
    if (n_numeric_ == 0)
      return 0;
    if (direct_)
      return mumps_count(direct_->id.infog[28]);
    PetscInt entries = 0;
    ALLOYSPEC_CHECK(MatMumpsGetInfog(factor_, 29, &entries));
    return mumps_count(MUMPS_INT(entries));
  }

  double ShiftedFactor::last_factorisation_flops() const
  {
    if (n_numeric_ == 0)
      return 0;
    if (direct_)
      return direct_->id.rinfog[2];
    PetscReal flops = 0;
    ALLOYSPEC_CHECK(MatMumpsGetRinfog(factor_, 3, &flops));
    return flops;
  }

  unsigned int ShiftedFactor::rhs_block() const
  {
    if (rhs_block_ == 0)
      {
        PetscInt block = 0;
        if (direct_)
          block = direct_->id.icntl[26];
        else
          ALLOYSPEC_CHECK(MatMumpsGetIcntl(factor_, 27, &block));
        rhs_block_ =
          static_cast<unsigned int>(std::max<PetscInt>(1, block < 0 ? -block : block));
      }
    return rhs_block_;
  }

  std::size_t ShiftedFactor::negative_pivots() const
  {
    if (inertia_ != Inertia::counted || n_numeric_ == 0)
      throw std::logic_error("ShiftedFactor::negative_pivots: no factorisation set up for an "
                             "inertia count");
    // INFOG(12): negative pivots of the LDLᵀ factor (with ICNTL(13) = 1 the
    // root too), what PETSc's MatGetInertia reports for MUMPS.
    if (direct_)
      return static_cast<std::size_t>(direct_->id.infog[11]);
    PetscInt n_negative = 0, n_zero = 0, n_positive = 0;
    ALLOYSPEC_CHECK(MatGetInertia(factor_, &n_negative, &n_zero, &n_positive));
    return static_cast<std::size_t>(n_negative);
  }

  std::size_t ShiftedFactor::zero_pivots() const
  {
    if (inertia_ != Inertia::counted || n_numeric_ == 0)
      throw std::logic_error("ShiftedFactor::zero_pivots: no factorisation set up for an "
                             "inertia count");
    // INFOG(28): null pivots detected (ICNTL(24) = 1).
    if (direct_)
      return static_cast<std::size_t>(direct_->id.infog[27]);
    PetscInt n_negative = 0, n_zero = 0, n_positive = 0;
    ALLOYSPEC_CHECK(MatGetInertia(factor_, &n_negative, &n_zero, &n_positive));
    return static_cast<std::size_t>(n_zero);
  }
} // namespace alloyspec::internal
