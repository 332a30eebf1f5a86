// Status rules for copying records between archives (see sync_rules.h).
#include "store/sync_rules.h"

namespace ampbench::store {

namespace {

int progress_rank(SessionStatus status) {
    switch (status) {
        case SessionStatus::running: return 0;
        case SessionStatus::interrupted: return 1;
        case SessionStatus::complete:
        case SessionStatus::aborted: return 2;
    }
    return 0;
}

}  // namespace

bool session_status_is_newer(const Session& from, SessionStatus here,
                             const std::string& here_finished) {
    const int a = progress_rank(from.status), b = progress_rank(here);
    if (a != b) return a > b;
    // ISO-8601 UTC times compare as text.
    return from.status == here && from.finished_utc > here_finished;
}

bool lot_status_is_newer(const std::string& from, const std::string& here) {
    return from != here && !(from == "open" && here != "open");
}

}  // namespace ampbench::store
