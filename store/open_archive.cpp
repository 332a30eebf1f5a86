// open_archive: the one place that picks a backend from the location's form.
#include <fmt/format.h>

#include "core/errors.h"
#include "store/postgres_archive.h"
#include "store/sqlite_archive.h"

namespace ampbench::store {

std::unique_ptr<Archive> open_archive(const std::string& location, const ArchiveOptions& options) {
    if (is_postgres_url(location)) return std::make_unique<PostgresArchive>(location, options);
    std::string path = location;
    if (path.rfind("sqlite:", 0) == 0) {
        path = path.substr(7);
        if (path.rfind("//", 0) == 0) path = path.substr(2);
    } else if (const auto colon = path.find("://"); colon != std::string::npos) {
        throw StoreError(fmt::format("archive {}: the '{}' backend is not available in this build",
                                     location, path.substr(0, colon)));
    }
    if (path.empty()) throw StoreError("archive: empty path");
    return std::make_unique<SqliteArchive>(path, options);
}

}  // namespace ampbench::store
