/** @file record_reader.h  The strict reader of a study folder's records. */
#pragma once

#include <alloyspec/io/results_store.h>

#include <cstdint>
#include <string>
#include <vector>

namespace alloyspec
{
  /** What a study folder holds, as read by read_stored_records(). */
  struct StoredRecords
  {
    /** Complete records, in the order they were stored. */
    std::vector<RealisationRecord> records;
    /** What was dropped as the remains of an interrupted write, one sentence each. */
    std::vector<std::string> warnings;
    /**
     * Lengths in bytes of the two files up to the end of the last complete
     * record: `--resume` cuts the files there before appending, so that the
     * remains of an interrupted write never sit between two records.
     */
    std::uint64_t eigenvalue_bytes = 0;
    std::uint64_t summary_bytes    = 0;
  };

  /**
   * Reads `eigenvalues.csv` and `realisations.csv` of @p directory and never
   * guesses. The store appends a round's eigenvalue lines, fsyncs them, and only
   * then appends their summary lines, so a crash (SIGKILL, power loss) can leave
   * exactly two kinds of remains, both at the end of a file:
   *  - a torn last line, without its newline, in either file;
   *  - eigenvalue lines after the last summary line (their summary never made
   *    it to disk).
   * These are dropped, each with a warning. Anything else is an InputError
   * (exit status 2) naming the file and line: a header that is not ours, a line
   * that does not parse, a value that is not a finite number where one is
   * required (the missing marker `nan` is allowed only for the error bound,
   * IPR and central weight), an eigenvalue below the record's potential minimum
   * (impossible: @f$H \ge \min q@f$ and so is its Galerkin approximation) or out
   * of ascending order, a record stored twice, or a summary line whose
   * eigenvalue count disagrees with the eigenvalue lines that precede it.
   * A folder without either file holds no records; one file without the other
   * is an error unless what is missing is only crash remains.
   */
  StoredRecords read_stored_records(const std::string &directory);
} // namespace alloyspec
