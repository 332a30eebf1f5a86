// The sync methods of SqliteArchive are not part of this branch; each refuses with StoreError.
#include "core/errors.h"
#include "store/sqlite_archive.h"

namespace ampbench::store {

std::vector<Session> SqliteArchive::sessions() { throw StoreError("not built in this branch"); }

std::optional<Session> SqliteArchive::session_by_uuid(const std::string&) {
    throw StoreError("not built in this branch");
}

CopyCounts SqliteArchive::copy_session(const SessionDetail&) {
    throw StoreError("not built in this branch");
}

CopyCounts SqliteArchive::copy_lot(const Lot&, const std::string&, const std::vector<Device>&) {
    throw StoreError("not built in this branch");
}

}  // namespace ampbench::store
