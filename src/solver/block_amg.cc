#include "block_amg.h"

#include "petsc_handle.h"
#include "shifted_rows.h"

#include <MueLu_CreateTpetraPreconditioner.hpp>
#include <Teuchos_DefaultMpiComm.hpp>
#include <Teuchos_ParameterList.hpp>
#include <Tpetra_CrsMatrix.hpp>
#include <Tpetra_Map.hpp>
#include <Tpetra_MultiVector.hpp>

#include <algorithm>
#include <chrono>
#include <stdexcept>
#include <vector>

namespace alloyspec::internal
{
  namespace
  {
    using Node        = Tpetra::Map<>::node_type;
    using Ordinal     = int;
    using GlobalIndex = long long;
    using TMap        = Tpetra::Map<Ordinal, GlobalIndex, Node>;
    using TMatrix     = Tpetra::CrsMatrix<double, Ordinal, GlobalIndex, Node>;
    using TBlock      = Tpetra::MultiVector<double, Ordinal, GlobalIndex, Node>;
    using TOperator   = Tpetra::Operator<double, Ordinal, GlobalIndex, Node>;
    using Cycle       = MueLu::TpetraOperator<double, Ordinal, GlobalIndex, Node>;

    /** Columns per cycle (block_amg.h says why a fixed number, and why 8). */
    constexpr unsigned int cycle_width = 8;
  } // namespace

  struct BlockAmg::Impl
  {
    Teuchos::RCP<const Teuchos::Comm<int>> comm;
    Teuchos::RCP<const TMap>               map;
    Teuchos::RCP<TMatrix>                  shifted;
    Teuchos::RCP<Cycle>                    cycle;
    mutable Teuchos::RCP<TBlock>           in, out;
    PetscInt64                             k_id    = -1;
    PetscObjectState                       pattern = 0;
    PetscInt                               first = 0, last = 0;
    double                                 setup_seconds = 0;
  };

  BlockAmg::BlockAmg()
    : impl_(std::make_unique<Impl>())
  {}
  BlockAmg::~BlockAmg() = default;

  void BlockAmg::setup(Mat K, Mat M, const double sigma)
  {
    const auto start = std::chrono::steady_clock::now();
    Impl      &s     = *impl_;
    MPI_Comm   comm  = MPI_COMM_NULL;
    ALLOYSPEC_CHECK(PetscObjectGetComm(reinterpret_cast<PetscObject>(K), &comm));
    PetscInt64       k_id    = -1;
    PetscObjectState pattern = 0;
    ALLOYSPEC_CHECK(PetscObjectGetId(reinterpret_cast<PetscObject>(K), &k_id));
    ALLOYSPEC_CHECK(MatGetNonzeroState(K, &pattern));
    PetscInt n = 0;
    ALLOYSPEC_CHECK(MatGetSize(K, &n, nullptr));
    ALLOYSPEC_CHECK(MatGetOwnershipRange(K, &s.first, &s.last));
    const bool new_graph = k_id != s.k_id || pattern != s.pattern;
    if (new_graph)
      {
        s.comm = Teuchos::rcp(new Teuchos::MpiComm<int>(comm));
        s.map  = Teuchos::rcp(new TMap(static_cast<Tpetra::global_size_t>(n),
                                       static_cast<std::size_t>(s.last - s.first), 0, s.comm));
        s.shifted.reset();
        s.k_id    = k_id;
        s.pattern = pattern;
      }

    if (s.shifted.is_null())
      {
        // Tpetra allocates each row once, so count the entries first.
        std::vector<std::size_t> per_row(static_cast<std::size_t>(s.last - s.first));
        for (PetscInt i = s.first; i < s.last; ++i)
          {
            PetscInt nk = 0;
            ALLOYSPEC_CHECK(MatGetRow(K, i, &nk, nullptr, nullptr));
            per_row[std::size_t(i - s.first)] = static_cast<std::size_t>(nk);
            ALLOYSPEC_CHECK(MatRestoreRow(K, i, &nk, nullptr, nullptr));
          }
        s.shifted = Teuchos::rcp(
          new TMatrix(s.map, Teuchos::ArrayView<const std::size_t>(per_row.data(), Ordinal(per_row.size()))));
      }
    else
      s.shifted->resumeFill();
    std::vector<GlobalIndex> columns;
    for_each_shifted_row(K, M, sigma,
                         [&](PetscInt i, const std::vector<PetscInt> &row, const std::vector<double> &values) {
                           columns.assign(row.begin(), row.end());
                           const Teuchos::ArrayView<const GlobalIndex> cv(columns.data(), Ordinal(columns.size()));
                           const Teuchos::ArrayView<const double>      vv(values.data(), Ordinal(values.size()));
                           if (new_graph)
                             s.shifted->insertGlobalValues(GlobalIndex(i), cv, vv);
                           else
                             s.shifted->replaceGlobalValues(GlobalIndex(i), cv, vv);
                         });
    s.shifted->fillComplete();

    Teuchos::ParameterList p;
    p.set("verbosity", "none");
    p.set("problem: symmetric", true);
    p.set("multigrid algorithm", "sa");
    p.set("aggregation: drop tol", 0.02);
    p.set("sa: use filtered matrix", true);
    p.set("smoother: type", "CHEBYSHEV");
    p.sublist("smoother: params").set("chebyshev: degree", 1);
    p.set("coarse: type", "KLU2");
    p.set("coarse: max size", 2000);
    p.set("repartition: enable", false);
    s.cycle = MueLu::CreateTpetraPreconditioner(Teuchos::RCP<TOperator>(s.shifted), p);
    s.in.reset();
    s.out.reset();
    s.setup_seconds = std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count();
  }

  void BlockAmg::apply(const double *in, double *out, const unsigned int columns) const
  {
    Impl             &s = *impl_;
    const std::size_t n = static_cast<std::size_t>(s.last - s.first);
    if (s.in.is_null())
      {
        s.in  = Teuchos::rcp(new TBlock(s.map, cycle_width, false));
        s.out = Teuchos::rcp(new TBlock(s.map, cycle_width, false));
      }
    const unsigned int width = static_cast<unsigned int>(s.in->getNumVectors());
    for (unsigned int first = 0; first < columns; first += width)
      {
        const unsigned int now = std::min(width, columns - first);
        for (unsigned int j = 0; j < width; ++j)
          {
            auto col = s.in->getDataNonConst(j);
            if (j < now)
              std::copy(in + (first + j) * n, in + (first + j + 1) * n, col.getRawPtr());
            else
              std::fill(col.getRawPtr(), col.getRawPtr() + n, 0.0);
          }
        s.cycle->apply(*s.in, *s.out);
        for (unsigned int j = 0; j < now; ++j)
          {
            const auto col = s.out->getData(j);
            std::copy(col.getRawPtr(), col.getRawPtr() + n, out + (first + j) * n);
          }
      }
  }

  double BlockAmg::last_setup_seconds() const { return impl_->setup_seconds; }
} // namespace alloyspec::internal
