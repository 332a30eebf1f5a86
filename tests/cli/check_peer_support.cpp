// The scripted peers of tests/drivers, compiled into the CLI suite as well (one source of truth).
#include "drivers/peer_support.cpp"
