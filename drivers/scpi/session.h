// An SCPI conversation over any Transport: commands and queries with terminators, IEEE 488.2
// blocks, *IDN?, *OPC? and draining the SYSTem:ERRor? queue (SCPI-1999 Vol. 2 §21.8).
#pragma once

#include <memory>
#include <string>
#include <vector>

#include "drivers/scpi/block.h"
#include "drivers/scpi/parse.h"
#include "drivers/transport/transport.h"

namespace ampbench::drivers {

struct SessionOptions {
    std::string instrument = "instrument";  // role name used in messages ("scope")
    std::string write_terminator = "\n";    // replies may end in "\n" or "\r\n"
    double timeout_s = 5.0;
    size_t max_block_bytes = kDefaultMaxBlockBytes;
    std::string identify = "*IDN?";
    std::string operation_complete = "*OPC?";
    std::string clear_status = "*CLS";
    std::string error_query = "SYSTem:ERRor?";
    int max_errors = 32;  // bound on draining the error queue
};

class ScpiSession {
public:
    ScpiSession(std::unique_ptr<Transport> transport, SessionOptions options);
    ~ScpiSession();
    ScpiSession(const ScpiSession&) = delete;
    ScpiSession& operator=(const ScpiSession&) = delete;

    void write(const std::string& command);
    // The reply line without its terminator. timeout_s <= 0 means the session default.
    std::string query(const std::string& command, double timeout_s = 0.0);
    // InstrumentError naming the command and the reply when the reply is not a number.
    double query_number(const std::string& command);
    bool query_bool(const std::string& command);
    // The data of a definite or indefinite block reply.
    std::string query_block(const std::string& command, double timeout_s = 0.0);

    Identity identify();
    // *OPC? and wait for its "1" up to timeout_s.
    void wait_complete(double timeout_s);
    // Reads SYSTem:ERRor? until 0,"No error" (at most max_errors entries); returns the errors.
    std::vector<ScpiError> drain_errors();
    // drain_errors(), then InstrumentError naming `after_command`, the code, its SCPI-1999 class
    // and the instrument's message if there were any.
    void check_errors(const std::string& after_command);
    // Reopens the transport after a drop.
    void reconnect();

    Transport& transport() { return *transport_; }
    const SessionOptions& options() const { return options_; }

private:
    std::string read_line(const std::string& command, Deadline deadline);
    std::string read_block(const std::string& command, Deadline deadline);
    template <class F>
    auto guarded(const std::string& command, double timeout_s, F&& f);
    std::unique_ptr<Transport> transport_;
    SessionOptions options_;
};

// A reply for an error message: control bytes escaped, cut to 80 characters.
std::string reply_excerpt(std::string_view reply);

}  // namespace ampbench::drivers
