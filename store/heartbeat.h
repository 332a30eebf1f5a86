// Keeps a running session's heartbeat fresh from a background thread with its own archive
// connection, for procedures that may spend longer than the stale limit between readings.
#pragma once

#include <condition_variable>
#include <cstdint>
#include <mutex>
#include <string>
#include <thread>

#include "store/archive.h"

namespace ampbench::store {

class HeartbeatThread {
public:
    // Beats every `options.heartbeat_every_s` until destroyed.
    HeartbeatThread(std::string location, std::int64_t session_id, ArchiveOptions options = {});
    ~HeartbeatThread();
    HeartbeatThread(const HeartbeatThread&) = delete;
    HeartbeatThread& operator=(const HeartbeatThread&) = delete;

    // Beats written so far (for tests).
    int beats() const;

private:
    void loop();

    std::string location_;
    std::int64_t session_id_;
    ArchiveOptions options_;
    mutable std::mutex mutex_;
    std::condition_variable wake_;
    bool stop_ = false;
    int beats_ = 0;
    std::thread thread_;
};

}  // namespace ampbench::store
