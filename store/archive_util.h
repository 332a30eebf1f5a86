// Pieces both archive backends share: time stamps, this process's identity, the stale-session
// rule and the canonical form of a design.
#pragma once

#include <cstdint>
#include <string>

#include "store/archive.h"

namespace ampbench::store {

// The column lists both backends read their records by, in the order the readers expect
// (`session` names the sessions table s and the boards table b).
namespace columns {
extern const char* const session;
extern const char* const point;
extern const char* const fit;
extern const char* const lot;
extern const char* const device;
}  // namespace columns

// "2026-11-03T10:15:02Z" for a time in seconds since the Unix epoch.
std::string utc_iso(double unix_s);
// gethostname(), or "unknown-host".
std::string this_host();
// A pid is alive when signal 0 can be sent to it (EPERM: it exists but is not ours).
bool pid_alive(std::int64_t pid);
// A running session is stale when its heartbeat is older than the allowance and it was written
// by a pid of this host that no longer exists (other hosts' processes cannot be seen).
bool stale_session(const std::string& here, const std::string& session_host,
                   std::int64_t session_pid, double heartbeat_s, double now_s,
                   double stale_after_s);
// The design's canonical JSON, content address and name (InputError naming `origin`).
DesignRecord canonical_design(const std::string& design_json, const std::string& origin);

}  // namespace ampbench::store
