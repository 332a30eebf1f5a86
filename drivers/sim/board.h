// The simulated board: a design with its part values drawn from a seed (or given, or faulted),
// loaded by the bench's generator, probes and meter, and evolved in virtual time by fit/circuit
// (periodic steady state, settling by the period-to-period transition, real integration for
// captures).
#pragma once

#include <cstdint>
#include <memory>
#include <string>
#include <utility>
#include <vector>

#include "core/bench_file.h"
#include "fit/circuit/design.h"

namespace ampbench::sim {

// What a sim:// query asks for: seed=7, fault=C3:open|short, value=R4:3k3 (repeatable).
struct BoardSpec {
    std::uint64_t seed = 1;
    std::vector<std::pair<std::string, std::string>> faults;  // ref -> "open" / "short"
    std::vector<std::pair<std::string, std::string>> values;  // ref -> value text
};

// From "sim://?seed=7&fault=C3:open&value=R4:3k3"; InputError (field `field`) on a bad key or value.
BoardSpec parse_board_spec(const std::string& sim_uri, const std::string& field = "uri");
// Adds "REF:open" / "REF:VALUE" texts as the CLI gives them.
void add_fault(BoardSpec& spec, const std::string& text);
void add_value(BoardSpec& spec, const std::string& text);

inline constexpr double kOpenOhms = 1e9;    // an open part
inline constexpr double kShortOhms = 1e-3;  // a shorted part

// The design actually built: every value drawn inside its tolerance (normal, σ = tol/3, cut at
// ±tol), every transistor's BF drawn uniformly in beta_range (each transistor its own model),
// explicit values applied, faulted parts replaced by 1 GΩ / 1 mΩ resistors. InputError naming
// the ref for a part that does not exist or a fault that does not apply.
circuit::Design draw_board(const circuit::Design& nominal, const BoardSpec& spec);

// The drawn board plus the bench's probe loading as parts PROBE1_R, PROBE1_C, ... (by scope
// channel order), written as an ampbench-design/1 file.
std::string reveal_design_json(const circuit::Design& drawn, const BenchFile& bench);

// One recorded stretch of the board's waveforms on a uniform grid.
struct BoardRecord {
    double t0_s = 0;  // virtual time of sample 0
    double h_s = 0;
    std::vector<std::vector<double>> volts;  // per requested node, samples at t0 + k·h
    double trigger_s = 0;                    // virtual time of the trigger
    bool triggered = false;
};

class SimulatedBoard {
public:
    SimulatedBoard(circuit::Design drawn, const BenchFile& bench);
    ~SimulatedBoard();
    SimulatedBoard(const SimulatedBoard&) = delete;
    SimulatedBoard& operator=(const SimulatedBoard&) = delete;

    const circuit::Design& design() const;
    // Node index of a probe name or node name; 0 (ground) when unknown.
    int node_of_probe(const std::string& probe) const;
    int node_of(const std::string& node_name) const;

    // Settings take effect at virtual time t_s (the board first evolves up to t_s).
    void set_supply(double t_s, bool on, double volts, double current_limit_a);
    // Generator EMF (already scaled for the load setting): peak amplitude, frequency, offset.
    // Frequency changes keep the phase continuous.
    void set_generator(double t_s, double emf_peak_v, double freq_hz, double offset_v);
    // The meter's input resistance on `node` (0 = not connected).
    void route_meter(double t_s, int node, double ohms);

    // DC at a node and the supply's delivered current and terminal voltage at t_s.
    double dc_volts(double t_s, int node);
    double supply_current_a(double t_s);
    double supply_volts(double t_s);
    bool current_limited() const;

    // Evolves to t_s, waits for a rising crossing of `level_v` at `trigger_node` (at most about
    // 1.5 periods; else triggers at once), records `nodes` over length_s from the trigger plus
    // `margin_s` either side, and leaves the board at the end of the record.
    BoardRecord capture(double t_s, const std::vector<int>& nodes, int trigger_node, double level_v, double length_s,
                        double margin_s);

    double generator_freq_hz() const;
    // Virtual time up to which the board has been evolved, and counters for benchmarks.
    double time_s() const;
    long integrated_steps() const;

private:
    struct Impl;
    std::unique_ptr<Impl> impl_;
};

}  // namespace ampbench::sim
