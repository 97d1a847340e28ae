#include <alloyspec/core/collective_errors.h>

#include <deal.II/base/mpi.h>

#include <stdexcept>

namespace alloyspec
{
  void throw_if_any_failed(MPI_Comm comm, const std::string &error, bool input_error)
  {
    const std::string mine = error.empty() ? std::string() : (input_error ? "I" : "C") + error;
    const auto        all  = dealii::Utilities::MPI::all_gather(comm, mine);
    for (std::size_t p = 0; p < all.size(); ++p)
      if (!all[p].empty())
        {
          std::string text = all[p].substr(1);
          if (all.size() > 1)
            text = "(MPI rank " + std::to_string(p) + ") " + text;
          if (all[p][0] == 'I')
            throw InputError(text);
          throw std::runtime_error(text);
        }
  }
} // namespace alloyspec
