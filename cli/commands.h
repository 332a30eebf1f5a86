// Every subcommand registers itself here; each lives in its own cli/<name>.cpp.
#pragma once

#include "cli/app.h"

namespace ampbench::cli {


}  // namespace ampbench::cli
