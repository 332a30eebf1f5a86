// The archive's numbered migrations. Migration N takes an archive from schema version N-1 to N;
// an archive is never opened by a build older than its version.
#pragma once

#include <vector>

namespace ampbench::store {

// One numbered step, written once per backend (the same tables, columns and constraints, with
// the types mapped: INTEGER PRIMARY KEY -> BIGSERIAL, INTEGER -> BIGINT, REAL -> DOUBLE
// PRECISION, 0/1 flags -> BOOLEAN). Fixed scripts: no user text ever goes into SQL.
struct Migration {
    int version;
    const char* sqlite;
    const char* postgres;
};

// In version order, starting at 1.
const std::vector<Migration>& migrations();

}  // namespace ampbench::store
