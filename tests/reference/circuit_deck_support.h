// Test-side SPICE deck writer and wrdata reader: the same design file, written as an ngspice
// deck by code independent of the engine, so ngspice can act as the outside reference.
// Header-only because tests/bench/predict.cpp uses it too.
#pragma once

#include <unistd.h>

#include <cctype>
#include <cmath>
#include <complex>
#include <cstdio>
#include <cstdlib>
#include <filesystem>
#include <fstream>
#include <map>
#include <sstream>
#include <stdexcept>
#include <string>
#include <vector>

#include "fit/circuit/design.h"
#include "fit/circuit/netlist.h"

namespace ampbench::testing {

inline std::string spice_node(const std::string& node) {
    if (node == "0") return "0";
    std::string out = "n_";
    for (char c : node) out += std::isalnum(static_cast<unsigned char>(c)) ? c : '_';
    return out;
}

inline std::string spice_number(double v) {
    char buf[64];
    std::snprintf(buf, sizeof buf, "%.12g", v);
    return buf;
}

// The circuit part of a deck: supply, generator (Vgen behind Rgen), a 0-A AC current source
// into the out node for output impedance, every part, the probe loading and the model cards.
inline std::string spice_circuit(const circuit::Design& d, const circuit::BenchLoading& bench) {
    std::ostringstream o;
    o << "* " << d.name << "\n";
    o << "Vsupply " << spice_node(d.supply_node) << " 0 DC " << spice_number(d.supply_volts) << "\n";
    o << "Vgen ngen 0 DC 0 AC 1\n";
    o << "Rgen ngen " << spice_node(d.stimulus_node) << " " << spice_number(bench.generator_ohms)
      << "\n";
    o << "Iout 0 " << spice_node(d.probe_node("out")) << " DC 0 AC 0\n";
    int k = 0;
    for (const auto& load : bench.probes) {
        const std::string n = spice_node(d.probe_node(load.probe));
        o << "Rprobe" << k << " " << n << " 0 " << spice_number(load.ohms) << "\n";
        o << "Cprobe" << k << " " << n << " 0 " << spice_number(load.farads) << "\n";
        ++k;
    }
    for (const auto& p : d.parts) {
        using circuit::PartKind;
        const std::string name = "_" + p.ref;
        switch (p.kind) {
            case PartKind::resistor: o << "R" << name; break;
            case PartKind::capacitor: o << "C" << name; break;
            case PartKind::inductor: o << "L" << name; break;
            case PartKind::vsource: o << "V" << name; break;
            case PartKind::isource: o << "I" << name; break;
            case PartKind::npn:
            case PartKind::pnp:
                o << "Q" << name << " " << spice_node(p.nodes[0]) << " " << spice_node(p.nodes[1])
                  << " " << spice_node(p.nodes[2]) << " m_" << p.model << "\n";
                continue;
        }
        o << " " << spice_node(p.nodes[0]) << " " << spice_node(p.nodes[1]) << " ";
        if (p.kind == PartKind::vsource || p.kind == PartKind::isource) o << "DC ";
        o << spice_number(p.value) << "\n";
    }
    for (const auto& [name, m] : d.models) {
        // Which polarity: the first part using the model decides.
        std::string type = "NPN";
        for (const auto& p : d.parts)
            if (p.model == name) type = p.kind == circuit::PartKind::pnp ? "PNP" : "NPN";
        o << ".model m_" << name << " " << type << " (IS=" << spice_number(m.saturation_current_a)
          << " BF=" << spice_number(m.beta) << " BR=" << spice_number(m.reverse_beta)
          << " NF=" << spice_number(m.emission_coefficient)
          << " RB=" << spice_number(m.base_resistance_ohm) << " CJE=" << spice_number(m.cje_f)
          << " CJC=" << spice_number(m.cjc_f) << " VJE=" << spice_number(m.junction_potential_v)
          << " VJC=" << spice_number(m.junction_potential_v) << " MJE=" << spice_number(m.grading)
          << " MJC=" << spice_number(m.grading) << " TF=" << spice_number(m.transit_time_s);
        if (m.early_voltage_v > 0) o << " VAF=" << spice_number(m.early_voltage_v);
        o << ")\n";
    }
    return o.str();
}

// A table written by `wrdata` with `set wr_vecnames`: header names and rows of numbers.
struct WrData {
    std::vector<std::string> names;
    std::vector<std::vector<double>> rows;
};

inline WrData read_wrdata(const std::string& path) {
    std::ifstream in(path);
    if (!in) throw std::runtime_error("ngspice wrote no " + path);
    WrData out;
    std::string line;
    std::getline(in, line);
    std::istringstream head(line);
    for (std::string w; head >> w;) out.names.push_back(w);
    while (std::getline(in, line)) {
        std::istringstream row(line);
        std::vector<double> values;
        for (double v; row >> v;) values.push_back(v);
        if (!values.empty()) out.rows.push_back(values);
    }
    return out;
}

// Runs `ngspice -b` on a deck in `dir`; returns false when ngspice could not be started. Its
// exit status is not a verdict (batch mode without .print lines exits 1); missing wrdata files
// are.
inline bool run_ngspice(const std::filesystem::path& dir, const std::string& deck) {
    std::filesystem::create_directories(dir);
    { std::ofstream(dir / "deck.cir") << deck; }
    const std::string cmd = "cd '" + dir.string() + "' && ngspice -b deck.cir > ngspice.log 2>&1";
    const int status = std::system(cmd.c_str());
    return status != -1 && std::filesystem::exists(dir / "ngspice.log") &&
           std::system("command -v ngspice > /dev/null 2>&1") == 0;
}

// A fresh scratch directory below the build tree.
inline std::filesystem::path scratch_dir(const std::string& name) {
    const auto dir = std::filesystem::temp_directory_path() /
                     ("ampbench-" + name + "-" + std::to_string(::getpid()));
    std::filesystem::remove_all(dir);
    std::filesystem::create_directories(dir);
    return dir;
}

}  // namespace ampbench::testing
