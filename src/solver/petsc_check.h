/** @file petsc_check.h  Turning PETSc/SLEPc error codes into exceptions (source files only). */
#pragma once

#include <petscsys.h>

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
} // namespace alloyspec::internal

#define ALLOYSPEC_CHECK(call) ::alloyspec::internal::petsc_check((call), #call)
