// The interrupt flag: a lock-free atomic set from the signal handler.
#include "core/interrupt.h"

#include <atomic>
#include <csignal>

#include "core/errors.h"

namespace ampbench {
namespace {
std::atomic<bool> g_interrupted{false};
static_assert(std::atomic<bool>::is_always_lock_free);

extern "C" void on_signal(int) { g_interrupted.store(true); }
}  // namespace

void install_interrupt_handler() {
    struct sigaction action {};
    action.sa_handler = on_signal;
    sigemptyset(&action.sa_mask);
    sigaction(SIGINT, &action, nullptr);
    sigaction(SIGTERM, &action, nullptr);
}

bool interrupt_requested() { return g_interrupted.load(); }

void throw_if_interrupted() {
    if (g_interrupted.load()) throw Interrupted();
}

void request_interrupt() { g_interrupted.store(true); }
void clear_interrupt() { g_interrupted.store(false); }

}  // namespace ampbench
