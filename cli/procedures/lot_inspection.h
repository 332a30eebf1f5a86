// Incoming inspection of a transistor lot on its jig: device by device, with the jig unpowered
// while the operator changes the device, powered in order (DESIGN.md §6) to read the nodes,
// each device committed to the archive as soon as it is measured or skipped.
#pragma once

#include <cstdint>
#include <functional>
#include <iosfwd>
#include <map>
#include <optional>
#include <string>
#include <vector>

#include "core/clock.h"
#include "drivers/roles/meter.h"
#include "drivers/roles/supply.h"
#include "fit/lot/jig_measurement.h"
#include "fit/lot/lot_plan.h"
#include "store/archive.h"

namespace ampbench::procedures {

enum class OperatorAnswer { measure, skip, stop };

struct OperatorReply {
    OperatorAnswer answer = OperatorAnswer::measure;
    std::string reason;  // for a skip
};

// Whoever changes the devices: a person at the terminal, an automatic handler, a test.
class LotOperator {
public:
    virtual ~LotOperator() = default;
    // Asked with the jig unpowered: put device `position` of `n` into the socket.
    // `replacing` is set when the device replaces a skipped one.
    virtual OperatorReply insert_device(long position, long n, bool replacing) = 0;
    // Without a meter channel for `node`: move the probe there (the jig is powered).
    virtual void move_probe(const std::string& node) = 0;
    // --manual: the reading the operator sees at `node`, in volts.
    virtual double type_reading(const std::string& node) = 0;
};

// Reads answers from a stream: Enter measures, `s [reason]` skips, `q` (or end of input) stops.
class StreamOperator final : public LotOperator {
public:
    StreamOperator(std::istream& in, std::ostream& out) : in_(in), out_(out) {}
    OperatorReply insert_device(long position, long n, bool replacing) override;
    void move_probe(const std::string& node) override;
    double type_reading(const std::string& node) override;

private:
    std::string line();
    std::istream& in_;
    std::ostream& out_;
};

// Answers every question itself (--auto: virtual trays, automatic handlers).
class AutomaticOperator final : public LotOperator {
public:
    OperatorReply insert_device(long, long, bool) override { return {}; }
    void move_probe(const std::string&) override {}
    double type_reading(const std::string& node) override;
};

// The jig station as the procedure sees it.
struct LotStation {
    drivers::Meter* meter = nullptr;    // null: readings typed (--manual)
    drivers::Supply* supply = nullptr;  // null: the operator powers the jig
    Clock* clock = nullptr;
    lot::MeterModel meter_model;
    std::map<std::string, std::string> channel_of_node;  // jig node -> meter channel
    // Called once the operator has put a device in (the virtual tray draws it here), with the
    // number of the device taken from the tray (1, 2, ... over the whole lot).
    std::function<void(std::int64_t draw)> device_inserted;
    std::string bench_file;
    std::vector<store::InstrumentRecord> instruments;
    double settle_s = 0.2;  // after switching the jig on, before reading
};

// The plan as stored with the lot: the plan file's path and its JSON.
lot::LotPlan stored_plan(const store::Lot& lot);

// What one device's readings give, judged against the plan's spec.
struct DeviceResult {
    lot::DutOperatingPoint op;
    bool passed = false;
    std::vector<std::string> failures;  // "hfe 341 above max 300"
};
DeviceResult judge_device(const lot::LotPlan& plan, const lot::JigMeasurement& jig,
                          const std::map<std::string, double>& volts);

// Where the sample stands: devices measured, skips still to replace, the next position.
struct SampleState {
    long measured = 0;
    long defectives = 0;
    long next_position = 1;
    std::optional<std::int64_t> replaces;  // the skipped device the next one replaces
    std::int64_t draws = 0;                // devices taken from the tray so far
};
SampleState sample_state(const std::vector<store::Device>& devices);

struct LotMeasureOutcome {
    long measured_now = 0, skipped_now = 0;
    long measured = 0, defectives = 0, n = 0;
    bool stopped = false;  // the operator stopped before the sample was complete
};

// Runs the sample of `lot_code` from where it stands. InputError when the lot is unknown or its
// sample already complete; InstrumentError for a reading out of the meter's range (the device
// is kept as skipped, so it is replaced on the next run). Powers down on every way out.
LotMeasureOutcome measure_lot(store::Archive& archive, const std::string& lot_code, LotStation& station,
                              LotOperator& op, std::ostream& out);

}  // namespace ampbench::procedures
