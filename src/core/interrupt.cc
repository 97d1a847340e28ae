#include <alloyspec/core/interrupt.h>

#include <csignal>

namespace alloyspec
{
  namespace
  {
    volatile std::sig_atomic_t received_signal = 0;
    struct sigaction           previous_int{}, previous_term{};
    // Guards nest (the run command keeps one up around the study's own): only
    // the outermost installs and restores, so the saved dispositions are the
    // ones from before any guard.
    int depth = 0;

    extern "C" void on_signal(int signal)
    {
      if (received_signal != 0)
        {
          // Second request: give up finishing the realisation.
          sigaction(SIGINT, &previous_int, nullptr);
          sigaction(SIGTERM, &previous_term, nullptr);
          std::raise(signal);
          return;
        }
      received_signal = signal;
    }
  } // namespace

  InterruptGuard::InterruptGuard()
  {
    if (depth++ > 0)
      return;
    struct sigaction action{};
    action.sa_handler = on_signal;
    sigemptyset(&action.sa_mask);
    // SA_RESTART: a signal must not make a blocking write of the store fail.
    action.sa_flags = SA_RESTART;
    sigaction(SIGINT, &action, &previous_int);
    sigaction(SIGTERM, &action, &previous_term);
  }

  InterruptGuard::~InterruptGuard()
  {
    if (--depth > 0)
      return;
    sigaction(SIGINT, &previous_int, nullptr);
    sigaction(SIGTERM, &previous_term, nullptr);
  }

  void InterruptGuard::hold_until_exit()
  {
    // One level no destructor undoes.
    if (depth > 0)
      ++depth;
  }

  int InterruptGuard::received()
  {
    return received_signal;
  }

  void InterruptGuard::reset()
  {
    received_signal = 0;
  }

  std::string signal_name(int signal)
  {
    if (signal == SIGINT)
      return "SIGINT";
    if (signal == SIGTERM)
      return "SIGTERM";
    return "signal " + std::to_string(signal);
  }
} // namespace alloyspec
