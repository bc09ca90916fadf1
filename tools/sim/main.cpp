// junco-sim: the simulated bench process. See --help and docs/sim.md.
#include "tools/sim/app.hpp"
#include "tools/sim/config.hpp"
#include "junco/version.hpp"

#include <signal.h>
#include <unistd.h>

#include <cstdio>
#include <iostream>
#include <stdexcept>
#include <thread>

int main(int argc, char** argv) {
  using namespace junco::sim;
  if (junco::print_version_if_asked(argc, argv, "junco-sim")) return 0;
  ParsedArgs args;
  try {
    args = parse_args(argc, argv);
  } catch (const std::invalid_argument& e) {
    std::cerr << "junco-sim: " << e.what() << "\n";
    return 2;
  }
  if (args.help) {
    std::cout << help_text();
    return 0;
  }
  // Block the stop signals in every thread; the main thread waits for them.
  sigset_t stop;
  sigemptyset(&stop);
  sigaddset(&stop, SIGINT);
  sigaddset(&stop, SIGTERM);
  pthread_sigmask(SIG_BLOCK, &stop, nullptr);
  ::signal(SIGPIPE, SIG_IGN);

  try {
    SimApp app(args.config);
    // quit: reply first (the control thread returns), then stop.
    app.on_quit = [] {
      std::thread([] {
        std::this_thread::sleep_for(std::chrono::milliseconds(50));
        ::kill(::getpid(), SIGTERM);
      }).detach();
    };
    const std::string ready = app.start();
    std::cout << ready << std::endl;  // the one stdout line
    std::cerr << "junco-sim: ready, seed " << args.config.seed << ", " << args.config.slots << " slots\n";
    int sig = 0;
    sigwait(&stop, &sig);
    std::cerr << "junco-sim: stopping on signal " << sig << "\n";
  } catch (const std::exception& e) {
    std::cerr << "junco-sim: " << e.what() << "\n";
    return 1;
  }
  std::fflush(nullptr);
  _exit(0);  // endpoint threads are blocked in I/O; no state needs unwinding
}
