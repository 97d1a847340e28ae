#include <alloyspec/core/collective_errors.h>

#include <deal.II/base/mpi.h>

#include <stdexcept>

namespace alloyspec
{
  void throw_if_any_failed(MPI_Comm comm, const std::string &error, bool input_error)
  {
    // A rank is named as mpirun numbers it (its rank in MPI_COMM_WORLD), also
    // when comm is a team's; a message that a team already collected keeps
    // the rank it names when it is collected again over all ranks.
    static const std::string named = "(MPI rank ";
    std::string              mine;
    if (!error.empty())
      {
        mine = input_error ? "I" : "C";
        if (dealii::Utilities::MPI::n_mpi_processes(comm) > 1 && error.rfind(named, 0) != 0)
          mine += named + std::to_string(dealii::Utilities::MPI::this_mpi_process(MPI_COMM_WORLD)) +
                  ") ";
        mine += error;
      }
    const auto all = dealii::Utilities::MPI::all_gather(comm, mine);
    for (const auto &text : all)
      if (!text.empty())
        {
          if (text[0] == 'I')
            throw InputError(text.substr(1));
          throw std::runtime_error(text.substr(1));
        }
  }
} // namespace alloyspec
