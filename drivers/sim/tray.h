// The virtual tray for lot inspection: a test jig on the virtual bench whose socket receives a
// new transistor per device, drawn from a seeded population with a seeded share of defectives
// (`sim://?tray=SEED&defective=0.03`).
#pragma once

#include <cstdint>
#include <memory>
#include <optional>
#include <string>

#include "core/bench_file.h"
#include "core/clock.h"
#include "drivers/bench_instruments.h"
#include "fit/circuit/design.h"
#include "fit/lot/jig_design.h"

namespace ampbench::sim {

struct TraySpec {
    std::uint64_t tray_seed = 1;   // draws the transistors
    double defective_share = 0.0;  // probability that a drawn device is defective
    std::uint64_t bench_seed = 1;  // the instruments' own draws (meter gain error, noise)
};

// From "sim://?tray=7&defective=0.03[&seed=2]": nullopt when the query has no `tray`.
// InputError (field `field`) for a bad value or an unknown key.
std::optional<TraySpec> parse_tray_spec(const std::string& sim_uri, const std::string& field = "uri");

enum class TrayDefect { none, beta_low, beta_high, open_emitter };
const char* to_string(TrayDefect defect);

// One transistor as drawn from the tray.
struct TrayDevice {
    std::int64_t draw = 0;  // 1, 2, ... in the order the devices leave the tray
    TrayDefect defect = TrayDefect::none;
    double beta = 0.0;                // BF
    double saturation_current_a = 0;  // IS
};

// Device `draw` of the tray; depends only on (tray_seed, defective_share, draw). A good device
// has BF uniform over the socket model's beta_range (±30 % of BF without one) and IS
// log-normal with σ(ln IS) = 0.25 (from memory: IS of one type spreads by tens of percent);
// a defective one has BF far out (a quarter of the range's low end, or three times its high
// end) or an open emitter.
TrayDevice draw_tray_device(const TraySpec& spec, const lot::JigTransistorModel& model, std::int64_t draw);

// The jig as a simulated board: the jig's design file with its resistors at the values the jig
// computation uses (measured where given), every tolerance zero (the jig is one fixed build),
// and an isolated dummy stimulus node (a jig has no generator). The socket stays empty until a
// device is inserted.
circuit::Design jig_board(const lot::JigDesign& jig);
// The jig with `device` in the socket.
circuit::Design jig_with_device(const circuit::Design& board, const lot::JigDesign& jig, const TrayDevice& device);

// The virtual bench of a tray: the instruments answer for the jig with whatever device is in
// the socket. insert() builds a fresh simulated jig for the next device (all outputs off, as
// after the operator's change). Transports from transport_factory() follow the current jig.
class VirtualTray {
public:
    VirtualTray(lot::JigDesign jig, const BenchFile& bench, TraySpec spec, Clock& clock);
    ~VirtualTray();
    VirtualTray(const VirtualTray&) = delete;
    VirtualTray& operator=(const VirtualTray&) = delete;

    // Puts device `draw` of the tray into the socket; returns it.
    const TrayDevice& insert(std::int64_t draw);
    // The device in the socket; nullopt while the socket is empty.
    const std::optional<TrayDevice>& current() const;
    const TraySpec& spec() const;
    drivers::VirtualTransportFactory transport_factory();

private:
    struct Impl;
    std::unique_ptr<Impl> impl_;
};

}  // namespace ampbench::sim
