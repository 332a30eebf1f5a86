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

namespace columns {

const char* const session =
    "s.id, s.uuid, b.serial, s.kind, s.status, s.started_utc, s.finished_utc, s.operator, "
    "s.host, s.pid, s.heartbeat_unix_s, s.bench_file, s.software_version, s.notes";

const char* const point =
    "id, uuid, sequence, plan_index, freq_hz, in_amplitude_v, in_amplitude_sd_v, in_phase_deg, "
    "in_phase_sd_deg, out_amplitude_v, out_amplitude_sd_v, out_phase_deg, out_phase_sd_deg, "
    "gain_db, gain_db_sd, phase_deg, phase_deg_sd, thd_pct, flags, settings_json, taken_utc, "
    "superseded_by";

const char* const fit =
    "id, uuid, session_id, kind, model, params_json, report_json, midband_gain_db, f_low_hz, "
    "f_high_hz, created_utc";

const char* const lot =
    "id, uuid, lot_code, plan_json, quantity, supplier, status, session_id, created_utc";

const char* const device =
    "id, uuid, lot_id, device_index, readings_json, hfe, hfe_sd, vbe_v, vbe_sd_v, ic_a, ic_sd_a, "
    "vce_v, vce_sd_v, passed, skipped_reason, replacement_of";

}  // namespace columns

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
