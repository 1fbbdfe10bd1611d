#include "drivers/stop_signal.hpp"

#include <unistd.h>

#include <array>
#include <csignal>
#include <cstring>

namespace thermorph {
namespace {

std::atomic<bool> stopFlag{false};
std::atomic<int> stopSignal{0};
static_assert(std::atomic<bool>::is_always_lock_free && std::atomic<int>::is_always_lock_free,
              "signal handlers need lock-free atomics");

//! Registered temporary files: a fixed table, so the handler needs no allocation (async-signal-safe).
struct Slot {
  std::atomic<int> state{0};  // 0 free, 1 being written, 2 registered
  char path[4096] = {};
};
std::array<Slot, 32> slots;

void removeRegistered() {
  for (Slot& s : slots)
    if (s.state.load() == 2) ::unlink(s.path);  // unlink is async-signal-safe
}

extern "C" void onStopSignal(int signal) {
  if (stopFlag.load()) {
    // A second signal: stop at once. Remove the temporary files, then die by the signal (exit status 128 + it).
    removeRegistered();
    std::signal(signal, SIG_DFL);
    std::raise(signal);
    return;
  }
  stopSignal.store(signal);
  stopFlag.store(true);
}

}  // namespace

std::atomic<bool>& stopRequested() { return stopFlag; }
int stopSignalNumber() { return stopSignal.load(); }
int stopExitCode() { return 128 + stopSignal.load(); }
const char* stopSignalName() {
  const int s = stopSignal.load();
  return s == SIGINT ? "SIGINT" : s == SIGTERM ? "SIGTERM" : "a signal";
}

struct StopSignalGuard::Saved {
  struct sigaction interrupt {}, terminate {}, fileSize {};
};

StopSignalGuard::StopSignalGuard() : saved_(std::make_unique<Saved>()) {
  stopFlag.store(false);
  stopSignal.store(0);
  struct sigaction action {};
  action.sa_handler = onStopSignal;
  sigemptyset(&action.sa_mask);
  sigaction(SIGINT, &action, &saved_->interrupt);
  sigaction(SIGTERM, &action, &saved_->terminate);
  struct sigaction ignore {};
  ignore.sa_handler = SIG_IGN;
  sigemptyset(&ignore.sa_mask);
  sigaction(SIGXFSZ, &ignore, &saved_->fileSize);
}

StopSignalGuard::~StopSignalGuard() {
  sigaction(SIGINT, &saved_->interrupt, nullptr);
  sigaction(SIGTERM, &saved_->terminate, nullptr);
  sigaction(SIGXFSZ, &saved_->fileSize, nullptr);
}

void ignoreFileSizeSignal() { std::signal(SIGXFSZ, SIG_IGN); }

int registerTemporary(const char* path) {
  if (std::strlen(path) >= sizeof(Slot::path)) return -1;
  for (std::size_t i = 0; i < slots.size(); ++i) {
    int expected = 0;
    if (!slots[i].state.compare_exchange_strong(expected, 1)) continue;
    std::strcpy(slots[i].path, path);
    slots[i].state.store(2);
    return static_cast<int>(i);
  }
  return -1;
}

void unregisterTemporary(int slot) {
  if (slot >= 0 && static_cast<std::size_t>(slot) < slots.size()) slots[static_cast<std::size_t>(slot)].state.store(0);
}

}  // namespace thermorph
