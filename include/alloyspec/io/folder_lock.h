/** @file folder_lock.h  One writer per output folder at a time. */
#pragma once

#include <string>

namespace alloyspec
{
  /**
   * An exclusive lock on an output folder, held for the lifetime of the object.
   *
   * Two commands writing into one folder at once would interleave their records
   * (one study's summary lines beside the other's eigenvalues) without any sign
   * of it, so every command that writes into a folder (`run`, `run --resume`,
   * `summarise`, `count`, `landscape`) holds this lock for as long as it writes.
   *
   * The lock is the file `in_use.lock` in the folder, holding "host pid" of its
   * holder, with an advisory `flock` on it. The kernel releases a `flock` when its
   * holder ends in any way (also SIGKILL), so a lock file left behind by a killed
   * run is recognised as stale (its `flock` can be taken) and taken over without
   * guessing from process ids. The file is removed when the holder ends normally.
   */
  class FolderLock
  {
  public:
    /** The name of the lock file inside a locked folder. */
    static constexpr const char *file_name = "in_use.lock";

    /**
     * Takes the lock of @p directory, which must exist. Throws InputError
     * (exit status 2) naming the holder's host and process id when another
     * process holds it; @p purpose says what the caller wanted to do, for the
     * message.
     */
    FolderLock(const std::string &directory, const std::string &purpose);
    ~FolderLock();
    FolderLock(const FolderLock &)            = delete;
    FolderLock &operator=(const FolderLock &) = delete;

    /** True if a lock file was left by a holder that ended without removing it. */
    bool took_over_stale() const { return took_over_stale_; }
    /** "host pid" of the stale holder taken over, empty if none. */
    const std::string &stale_holder() const { return stale_holder_; }

  private:
    std::string path_;
    int         fd_ = -1;
    bool        took_over_stale_ = false;
    std::string stale_holder_;
  };
} // namespace alloyspec
