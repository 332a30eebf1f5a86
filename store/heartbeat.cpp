// The heartbeat thread: a failed beat is not fatal here (the next reading the procedure commits
// reports any archive problem on the main thread), so errors only skip a beat.
#include "store/heartbeat.h"

#include <chrono>

#include "core/errors.h"

namespace ampbench::store {

HeartbeatThread::HeartbeatThread(std::string location, std::int64_t session_id,
                                 ArchiveOptions options)
    : location_(std::move(location)), session_id_(session_id), options_(std::move(options)) {
    thread_ = std::thread([this] { loop(); });
}

HeartbeatThread::~HeartbeatThread() {
    {
        std::lock_guard lock(mutex_);
        stop_ = true;
    }
    wake_.notify_all();
    thread_.join();
}

int HeartbeatThread::beats() const {
    std::lock_guard lock(mutex_);
    return beats_;
}

void HeartbeatThread::loop() {
    std::unique_ptr<Archive> archive;
    const auto period = std::chrono::duration<double>(options_.heartbeat_every_s);
    std::unique_lock lock(mutex_);
    while (!stop_) {
        lock.unlock();
        try {
            if (!archive) archive = open_archive(location_, options_);
            archive->heartbeat(session_id_);
            lock.lock();
            ++beats_;
        } catch (const Error&) {
            archive.reset();
            lock.lock();
        }
        wake_.wait_for(lock, period, [this] { return stop_; });
    }
}

}  // namespace ampbench::store
