// The bench file `ampbench-bench/1` (DESIGN.md §4.3) as plain data: which instrument plays which
// role, how the scope channels are probed, and the bench's limits. Drivers, the virtual bench and
// the predictor all read it from here.
#pragma once

#include <optional>
#include <string>
#include <utility>
#include <vector>

namespace ampbench {

struct InstrumentSpec {
    bool present = false;
    std::string role;  // "generator", "scope", "meter", "supply"
    std::string uri;
    std::string profile = "scpi-generic";
    std::string asset;
    std::string cal_due;  // YYYY-MM-DD or empty
    std::string certificate;
};

struct ScopeChannelSpec {
    std::string name;   // the scope's channel number as written in the file ("1", "2", ...)
    std::string probe;  // a probe name of the design ("in", "out")
    double ratio = 10.0;
    double ohms = 10e6;     // probe input resistance at the tip
    double farads = 12e-12; // probe input capacitance at the tip
    std::string coupling = "dc";
    double bandwidth_hz = 0.0;  // 0: full bandwidth
    std::string asset;
    std::string cal_due;
    std::string certificate;
};

struct GeneratorSpec : InstrumentSpec {
    double output_ohms = 50.0;
    std::string load_setting = "high-z";  // "high-z" or "50"
};

struct ScopeSpec : InstrumentSpec {
    double gain_accuracy = 0.02;  // fraction
    std::vector<ScopeChannelSpec> channels;
    const ScopeChannelSpec* channel_for_probe(const std::string& probe) const;
};

struct MeterSpec : InstrumentSpec {
    double input_ohms = 10e6;
    double accuracy = 0.0005;  // fraction of reading
    // Meter channel (as written, e.g. "101") -> design node, in file order.
    std::vector<std::pair<std::string, std::string>> channels;
};

struct SupplySpec : InstrumentSpec {};

struct BenchLimits {
    std::optional<double> max_generator_vpp;
    std::string calibration = "warn";  // "warn" or "refuse"
};

struct BenchFile {
    std::string path;
    double mains_hz = 50.0;
    GeneratorSpec generator;
    ScopeSpec scope;
    MeterSpec meter;
    SupplySpec supply;
    BenchLimits limits;

    // True when every instrument present is `sim://` (one shared virtual bench).
    bool is_virtual() const;
    // The instruments present, in the order generator, scope, meter, supply.
    std::vector<const InstrumentSpec*> instruments() const;
};

// Reads and validates a bench file. InputError naming the file and key for a bad value, an
// unknown role or key, a bench mixing sim:// and real instruments, or sim:// instruments whose
// queries differ.
BenchFile load_bench_file(const std::string& path);
// Same, from text (origin is used in messages).
BenchFile parse_bench_file(const std::string& text, const std::string& origin);

// The bench used when a command is given none: virtual instruments with default probes
// (10 MΩ ‖ 12 pF, ×10) on channels 1 = "in" and 2 = "out", a 50 Ω generator at high-Z setting.
BenchFile default_virtual_bench(const std::string& sim_query = "sim://");

}  // namespace ampbench
