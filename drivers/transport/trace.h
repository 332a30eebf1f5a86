// `--trace FILE`: a decorator that logs every exchange of any Transport (timestamp, instrument,
// direction, bytes with control characters escaped) to one shared log.
#pragma once

#include <memory>
#include <mutex>
#include <string>
#include <string_view>

#include "drivers/transport/transport.h"

namespace ampbench::drivers {

class TraceLog {
public:
    // Opens (truncates) `path`; InputError naming the path if it cannot be written.
    explicit TraceLog(const std::string& path);
    ~TraceLog();
    TraceLog(const TraceLog&) = delete;
    TraceLog& operator=(const TraceLog&) = delete;
    // direction: "->" sent, "<-" received, "!!" an error on that instrument.
    void record(std::string_view instrument, std::string_view direction, std::string_view bytes);

private:
    std::mutex mutex_;
    struct File;
    std::unique_ptr<File> file_;
};

// "\n" -> "\\n", bytes outside printable ASCII -> "\\xHH", backslash doubled.
std::string escape_bytes(std::string_view bytes);

class TracingTransport final : public Transport {
public:
    TracingTransport(std::unique_ptr<Transport> inner, std::string instrument, std::shared_ptr<TraceLog> log);

    void write(std::string_view bytes, Deadline deadline) override;
    std::string read_until(std::string_view terminator, Deadline deadline, size_t max_bytes) override;
    std::string read_exact(size_t n, Deadline deadline) override;
    bool has_end_of_message() const override { return inner_->has_end_of_message(); }
    std::string read_to_end_of_message(Deadline deadline, size_t max_bytes) override;
    void clear() override;
    void close() override;
    void reopen(Deadline deadline) override;
    std::string describe() const override { return inner_->describe(); }

private:
    template <class F>
    auto logged(std::string_view direction, F&& f);
    std::unique_ptr<Transport> inner_;
    std::string instrument_;
    std::shared_ptr<TraceLog> log_;
};

}  // namespace ampbench::drivers
