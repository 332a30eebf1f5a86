// The archive's numbered migrations. Migration N takes an archive from schema version N-1 to N;
// an archive is never opened by a build older than its version.
#pragma once

#include <vector>

namespace ampbench::store {

struct Migration {
    int version;
    const char* sql;  // a fixed script: no user text ever goes into SQL
};

// In version order, starting at 1.
const std::vector<Migration>& migrations();

}  // namespace ampbench::store
