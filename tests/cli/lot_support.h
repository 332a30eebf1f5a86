// Files for the lot CLI tests: the BC1 jig and a test plan copied into a test's directory (the
// plan optionally edited), and a virtual-tray bench file with a chosen sim:// query.
#pragma once

#include <functional>
#include <string>

#include <nlohmann/json_fwd.hpp>

#include "cli_support.h"

namespace ampbench::cli::testing {

struct LotFiles {
    std::string plan;
    std::string bench;
};

// `edit` may change the plan's JSON before it is written (bad plans for the error tests).
LotFiles write_lot_files(const CliTempDir& dir, const std::string& sim_query,
                         const std::function<void(nlohmann::json&)>& edit = {});

}  // namespace ampbench::cli::testing
