// The output-folder lock: a second holder is refused with an InputError that
// names the holder's host and process id; a lock file left by a holder that
// ended without removing it (a killed run) is taken over; the file is removed
// when the holder ends. flock(2) locks belong to an open file description, so
// two FolderLock objects in one process exclude each other like two processes.
#include <alloyspec/core/errors.h>
#include <alloyspec/io/folder_lock.h>

#include <gtest/gtest.h>

#include <filesystem>
#include <fstream>
#include <optional>
#include <string>

#include <unistd.h>

namespace
{
  namespace fs = std::filesystem;

  struct TemporaryFolder
  {
    fs::path path;
    explicit TemporaryFolder(const std::string &name)
      : path(fs::temp_directory_path() /
             ("alloyspec_lock_" + std::to_string(::getpid()) + "_" + name))
    {
      fs::remove_all(path);
      fs::create_directories(path);
    }
    ~TemporaryFolder() { fs::remove_all(path); }
  };

  std::string host_name()
  {
    char host[256] = {};
    ::gethostname(host, sizeof host - 1);
    return host;
  }
} // namespace

TEST(FolderLock, SecondHolderIsRefusedWithTheHolderNamed)
{
  using alloyspec::FolderLock;
  TemporaryFolder folder("second");
  const fs::path  file = folder.path / FolderLock::file_name;
  {
    const FolderLock first(folder.path.string(), "run a study there");
    EXPECT_TRUE(fs::exists(file));
    EXPECT_FALSE(first.took_over_stale());
    try
      {
        const FolderLock second(folder.path.string(), "summarise into it");
        ADD_FAILURE() << "a second lock of the same folder was granted";
      }
    catch (const alloyspec::InputError &e)
      {
        const std::string message = e.what();
        EXPECT_NE(message.find("process " + std::to_string(::getpid())), std::string::npos)
          << message;
        EXPECT_NE(message.find("host " + host_name()), std::string::npos) << message;
        EXPECT_NE(message.find("summarise into it"), std::string::npos) << message;
      }
    // The refused attempt must not have disturbed the holder's file.
    EXPECT_TRUE(fs::exists(file));
  }
  EXPECT_FALSE(fs::exists(file)) << "the lock file outlived its holder";
  // Free again.
  EXPECT_NO_THROW(FolderLock(folder.path.string(), "run a study there"));
}

TEST(FolderLock, StaleLockOfAKilledHolderIsTakenOver)
{
  using alloyspec::FolderLock;
  TemporaryFolder folder("stale");
  // What a SIGKILLed holder leaves: the file with its name, and no flock (the
  // kernel dropped it with the process).
  std::ofstream(folder.path / FolderLock::file_name) << "otherhost 4242\n";
  std::optional<FolderLock> lock;
  ASSERT_NO_THROW(lock.emplace(folder.path.string(), "resume the study there"));
  EXPECT_TRUE(lock->took_over_stale());
  EXPECT_EQ(lock->stale_holder(), "otherhost 4242");
  std::ifstream in(folder.path / FolderLock::file_name);
  std::string   host, pid;
  in >> host >> pid;
  EXPECT_EQ(host, host_name());
  EXPECT_EQ(pid, std::to_string(::getpid()));
}

TEST(FolderLock, UnwritableFolderIsAnInputError)
{
  if (::geteuid() == 0)
    GTEST_SKIP() << "running as root: permissions do not stop root from writing";
  TemporaryFolder folder("readonly");
  fs::permissions(folder.path, fs::perms::owner_read | fs::perms::owner_exec);
  EXPECT_THROW(alloyspec::FolderLock(folder.path.string(), "run a study there"),
               alloyspec::InputError);
  fs::permissions(folder.path, fs::perms::owner_all);
}
