// Trace log and tracing decorator.
#include "drivers/transport/trace.h"

#include <chrono>
#include <cstdio>
#include <ctime>

#include <fmt/format.h>

#include "core/errors.h"

namespace ampbench::drivers {

struct TraceLog::File {
    std::FILE* f = nullptr;
};

TraceLog::TraceLog(const std::string& path) : file_(std::make_unique<File>()) {
    file_->f = std::fopen(path.c_str(), "w");
    if (!file_->f) throw InputError(path, "--trace", "cannot open the trace file for writing");
}

TraceLog::~TraceLog() {
    if (file_->f) std::fclose(file_->f);
}

void TraceLog::record(std::string_view instrument, std::string_view direction, std::string_view bytes) {
    const auto now = std::chrono::system_clock::now();
    const auto us = std::chrono::duration_cast<std::chrono::microseconds>(now.time_since_epoch()).count();
    const std::time_t secs = static_cast<std::time_t>(us / 1000000);
    std::tm tm{};
    gmtime_r(&secs, &tm);
    char stamp[32];
    std::strftime(stamp, sizeof stamp, "%Y-%m-%dT%H:%M:%S", &tm);
    const std::string line = fmt::format("{}.{:06d}Z {} {} {}\n", stamp, static_cast<int>(us % 1000000),
                                         instrument, direction, escape_bytes(bytes));
    std::lock_guard lock(mutex_);
    std::fputs(line.c_str(), file_->f);
    std::fflush(file_->f);
}

std::string escape_bytes(std::string_view bytes) {
    std::string out;
    out.reserve(bytes.size());
    for (unsigned char c : bytes) {
        switch (c) {
            case '\n': out += "\\n"; break;
            case '\r': out += "\\r"; break;
            case '\t': out += "\\t"; break;
            case '\\': out += "\\\\"; break;
            default:
                if (c < 0x20 || c >= 0x7f) out += fmt::format("\\x{:02X}", c);
                else out += static_cast<char>(c);
        }
    }
    return out;
}

TracingTransport::TracingTransport(std::unique_ptr<Transport> inner, std::string instrument,
                                   std::shared_ptr<TraceLog> log)
    : inner_(std::move(inner)), instrument_(std::move(instrument)), log_(std::move(log)) {}

template <class F>
auto TracingTransport::logged(std::string_view direction, F&& f) {
    try {
        auto bytes = f();
        log_->record(instrument_, direction, bytes);
        return bytes;
    } catch (const Error& e) {
        log_->record(instrument_, "!!", e.what());
        throw;
    }
}

void TracingTransport::write(std::string_view bytes, Deadline deadline) {
    log_->record(instrument_, "->", bytes);
    try {
        inner_->write(bytes, deadline);
    } catch (const Error& e) {
        log_->record(instrument_, "!!", e.what());
        throw;
    }
}

std::string TracingTransport::read_until(std::string_view terminator, Deadline deadline, size_t max_bytes) {
    return logged("<-", [&] { return inner_->read_until(terminator, deadline, max_bytes); });
}

std::string TracingTransport::read_exact(size_t n, Deadline deadline) {
    return logged("<-", [&] { return inner_->read_exact(n, deadline); });
}

std::string TracingTransport::read_to_end_of_message(Deadline deadline, size_t max_bytes) {
    return logged("<-", [&] { return inner_->read_to_end_of_message(deadline, max_bytes); });
}

void TracingTransport::clear() { inner_->clear(); }

void TracingTransport::close() { inner_->close(); }

void TracingTransport::reopen(Deadline deadline) {
    log_->record(instrument_, "!!", "reopening the connection");
    inner_->reopen(deadline);
}

}  // namespace ampbench::drivers
