// Ctrl-C handling for long procedures: the signal handler only sets a flag; procedures poll it
// at safe points and unwind (powering down on the way, DESIGN.md §6).
#pragma once

namespace ampbench {

// Installs SIGINT/SIGTERM handlers that set the interrupt flag.
void install_interrupt_handler();
bool interrupt_requested();
// Throws Interrupted when the flag is set.
void throw_if_interrupted();
// For tests and for procedures that simulate an interrupt.
void request_interrupt();
void clear_interrupt();

}  // namespace ampbench
