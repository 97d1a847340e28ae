/** @file verify.h  `alloyspec verify`: the solver against independent references. */
#pragma once

#include <iosfwd>
#include <string>
#include <vector>

namespace alloyspec
{
  /** One line of the verification table. */
  struct VerificationCheck
  {
    std::string name;
    std::string reference; ///< what the value is compared with, and its source
    std::string value;     ///< the measured quantity
    std::string tolerance; ///< the bound it must meet
    bool        pass    = false;
    double      seconds = 0;
  };

  /**
   * Runs every check: free box (Dirichlet, Neumann) against closed forms with
   * multiplicities, constant shift, observed convergence order 2p for
   * p = 1..3, Weyl expansion against exact lattice counts, the semiclassical
   * limit of one random realisation, 1D against the exact reference
   * (Exact1dSpectrum), and the Krylov–Schur list against a dense generalised
   * solver (Eigen). @p thorough uses larger problems and more modes.
   * Progress lines go to @p log.
   */
  std::vector<VerificationCheck> run_verification(bool thorough, std::ostream &log);

  /** Prints the table of @p checks to @p out; returns 0 if all pass, else 1. */
  int print_verification(const std::vector<VerificationCheck> &checks, std::ostream &out);
} // namespace alloyspec
