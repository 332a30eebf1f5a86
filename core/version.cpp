// Version string, set by CMake from the project version.
#include "core/version.h"

#ifndef AMPBENCH_VERSION
#define AMPBENCH_VERSION "0.0.0"
#endif

namespace ampbench {
const char* software_version() { return AMPBENCH_VERSION; }
}  // namespace ampbench
