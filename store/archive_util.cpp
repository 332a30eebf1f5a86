// Helpers shared by SqliteArchive and PostgresArchive.
#include "store/archive_util.h"

#include <unistd.h>

#include <array>
#include <cerrno>
#include <cmath>
#include <csignal>
#include <ctime>

#include <nlohmann/json.hpp>

#include "store/canonical_json.h"

namespace ampbench::store {

std::string utc_iso(double unix_s) {
    const auto seconds = static_cast<std::time_t>(std::floor(unix_s));
    std::tm tm{};
    gmtime_r(&seconds, &tm);
    std::array<char, 32> text{};
    std::strftime(text.data(), text.size(), "%Y-%m-%dT%H:%M:%SZ", &tm);
    return text.data();
}

std::string this_host() {
    std::array<char, 256> name{};
    if (gethostname(name.data(), name.size() - 1) != 0) return "unknown-host";
    return name.data();
}

bool pid_alive(std::int64_t pid) {
    if (pid <= 0) return false;
    if (::kill(static_cast<pid_t>(pid), 0) == 0) return true;
    return errno == EPERM;
}

bool stale_session(const std::string& here, const std::string& session_host,
                   std::int64_t session_pid, double heartbeat_s, double now_s,
                   double stale_after_s) {
    return heartbeat_s < now_s - stale_after_s && session_host == here &&
           !pid_alive(session_pid);
}

DesignRecord canonical_design(const std::string& design_json, const std::string& origin) {
    DesignRecord d;
    d.canonical_json = canonical_json(design_json, origin);
    d.address = content_address(d.canonical_json, origin);
    const auto parsed = nlohmann::json::parse(d.canonical_json);
    if (parsed.is_object() && parsed.contains("name") && parsed["name"].is_string())
        d.name = parsed["name"].get<std::string>();
    return d;
}

}  // namespace ampbench::store
