#include <alloyspec/core/errors.h>
#include <alloyspec/io/folder_lock.h>

#include <cerrno>
#include <cstring>
#include <filesystem>
#include <string>

#include <fcntl.h>
#include <sys/file.h>
#include <sys/stat.h>
#include <unistd.h>

namespace alloyspec
{
  namespace
  {
    std::string this_holder()
    {
      char host[256] = "unknown";
      ::gethostname(host, sizeof host - 1);
      host[sizeof host - 1] = '\0';
      return std::string(host) + " " + std::to_string(::getpid());
    }

    /** The first line of the open lock file: "host pid" of whoever wrote it. */
    std::string read_holder(int fd)
    {
      char          buffer[300] = {};
      const ssize_t n           = ::pread(fd, buffer, sizeof buffer - 1, 0);
      std::string   text        = n > 0 ? std::string(buffer, static_cast<std::size_t>(n)) : "";
      const auto    newline     = text.find('\n');
      if (newline != std::string::npos)
        text.erase(newline);
      return text;
    }
  } // namespace

  FolderLock::FolderLock(const std::string &directory, const std::string &purpose)
    : path_((std::filesystem::path(directory) / file_name).string())
  {
    // A holder removes the file when it ends; if we open the file just before
    // that and lock the removed inode, we hold nothing. Hence: lock, then
    // check that the path still names the inode we locked, else start again.
    for (int attempt = 0; attempt < 100; ++attempt)
      {
        const int fd = ::open(path_.c_str(), O_RDWR | O_CREAT | O_CLOEXEC, 0644);
        if (fd < 0)
          throw InputError("output folder '" + directory + "': cannot create the lock file '" +
                           path_ + "' to " + purpose + ": " + std::strerror(errno) +
                           " (the folder must be writable)");
        if (::flock(fd, LOCK_EX | LOCK_NB) != 0)
          {
            const int   error  = errno;
            // The holder writes its name just after it takes the lock.
            std::string holder = read_holder(fd);
            for (int wait = 0; holder.empty() && wait < 50; ++wait)
              {
                ::usleep(10000);
                holder = read_holder(fd);
              }
            ::close(fd);
            if (error != EWOULDBLOCK)
              throw InputError("output folder '" + directory + "': cannot lock '" + path_ +
                               "': " + std::strerror(error));
            const auto space = holder.find(' ');
            const std::string description =
              space == std::string::npos ?
                (holder.empty() ? std::string("another process") : "'" + holder + "'") :
                "process " + holder.substr(space + 1) + " on host " + holder.substr(0, space);
            throw InputError("output folder '" + directory + "' is in use by " + description +
                             " (lock file '" + path_ + "'); cannot " + purpose +
                             " while another command writes there. Wait for it to end, or "
                             "choose another folder; nothing was changed");
          }
        struct stat locked {}, named {};
        if (::fstat(fd, &locked) != 0 || ::stat(path_.c_str(), &named) != 0 ||
            locked.st_ino != named.st_ino || locked.st_dev != named.st_dev)
          {
            ::close(fd);
            continue;
          }
        // Ours. Anything in the file was left by a holder that ended without
        // removing it (killed): its flock went with it, so it is stale.
        stale_holder_    = read_holder(fd);
        took_over_stale_ = !stale_holder_.empty();
        const std::string me = this_holder() + "\n";
        if (::ftruncate(fd, 0) != 0 ||
            ::pwrite(fd, me.data(), me.size(), 0) != static_cast<ssize_t>(me.size()))
          {
            const int error = errno;
            ::unlink(path_.c_str());
            ::close(fd);
            throw InputError("output folder '" + directory + "': cannot write the lock file '" +
                             path_ + "': " + std::strerror(error));
          }
        fd_ = fd;
        return;
      }
    throw InputError("output folder '" + directory + "': the lock file '" + path_ +
                     "' keeps being replaced by other processes; cannot " + purpose);
  }

  FolderLock::~FolderLock()
  {
    if (fd_ < 0)
      return;
    // Remove while still holding the lock, so that nobody locks the old inode
    // and believes it holds the folder (see the check in the constructor).
    ::unlink(path_.c_str());
    ::close(fd_);
  }
} // namespace alloyspec
