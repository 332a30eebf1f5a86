// ngspice deck writing and batch runs, and the scipy script runner, for the fit reference tests.
#include "fit_support.h"

#include <cmath>
#include <cstdlib>
#include <filesystem>
#include <fstream>
#include <sstream>
#include <stdexcept>

#include <unistd.h>

#include <fmt/format.h>

namespace ampbench::fit::testing {
namespace {

std::filesystem::path scratch_dir(const std::string& tag) {
    const auto dir = std::filesystem::temp_directory_path() / fmt::format("ampbench-{}-{}", tag, getpid());
    std::filesystem::create_directories(dir);
    return dir;
}

std::string slurp(const std::filesystem::path& p) {
    std::ifstream in(p);
    std::ostringstream s;
    s << in.rdbuf();
    return s.str();
}

}  // namespace

std::vector<SpiceResponse> simulate_boards(const std::vector<CeBoard>& boards, int points_per_decade, double f_lo,
                                           double f_hi, const std::string& tag) {
    const auto dir = scratch_dir(tag);
    std::ostringstream deck;
    deck << "* ampbench fit reference: linearised common-emitter boards\n";
    deck << "V1 in 0 DC 0 AC 1\n";
    for (std::size_t k = 0; k < boards.size(); ++k) {
        const CeBoard& b = boards[k];
        deck << fmt::format("Rs_{0} in a_{0} {1:.12g}\nCin_{0} a_{0} b_{0} {2:.12g}\n", k, b.rs, b.cin);
        if (b.rpar > 0) deck << fmt::format("Rpar_{0} a_{0} b_{0} {1:.12g}\n", k, b.rpar);
        deck << fmt::format("Rb_{0} b_{0} 0 {1:.12g}\nRpi_{0} b_{0} 0 {2:.12g}\nCpi_{0} b_{0} 0 {3:.12g}\n", k, b.rb,
                            b.rpi, b.cpi);
        // The transconductance pulls the collector down as the base rises: an inverting stage.
        deck << fmt::format("G_{0} c_{0} 0 b_{0} 0 {1:.12g}\nRc_{0} c_{0} 0 {2:.12g}\n", k, b.gm, b.rc);
        deck << fmt::format("Cout_{0} c_{0} o_{0} {1:.12g}\nRL_{0} o_{0} 0 {2:.12g}\nCL_{0} o_{0} 0 {3:.12g}\n", k,
                            b.cout, b.rl, b.cl);
    }
    deck << ".control\nset wr_singlescale\nset wr_vecnames\noption numdgt=15\n";
    deck << fmt::format("ac dec {} {:.12g} {:.12g}\n", points_per_decade, f_lo, f_hi);
    const std::size_t chunk = 10;
    for (std::size_t start = 0; start < boards.size(); start += chunk) {
        deck << fmt::format("wrdata {}", (dir / fmt::format("out{}.txt", start / chunk)).string());
        for (std::size_t k = start; k < std::min(boards.size(), start + chunk); ++k)
            deck << fmt::format(" vdb(o_{0}) cph(o_{0})", k);
        deck << "\n";
    }
    deck << ".endc\n.end\n";
    const auto deck_path = dir / "boards.cir";
    std::ofstream(deck_path) << deck.str();
    const std::string cmd = fmt::format("cd '{}' && ngspice -b boards.cir > ngspice.log 2>&1", dir.string());
    // ngspice -b exits with 1 when the deck has no .print lines even though the .control block
    // ran, so success is judged by the data files and the log instead.
    const int rc = std::system(cmd.c_str());
    const std::string log = slurp(dir / "ngspice.log");
    if (rc < 0 || log.find("rror") != std::string::npos || !std::filesystem::exists(dir / "out0.txt"))
        throw std::runtime_error("ngspice failed: " + log);

    std::vector<SpiceResponse> out(boards.size());
    for (std::size_t start = 0; start < boards.size(); start += chunk) {
        std::ifstream in(dir / fmt::format("out{}.txt", start / chunk));
        std::string line;
        std::getline(in, line);  // vector names
        const std::size_t count = std::min(boards.size(), start + chunk) - start;
        while (std::getline(in, line)) {
            std::istringstream s(line);
            double f = 0;
            if (!(s >> f)) continue;
            for (std::size_t k = 0; k < count; ++k) {
                double db = 0, ph = 0;
                s >> db >> ph;
                out[start + k].freq_hz.push_back(f);
                out[start + k].gain_db.push_back(db);
                out[start + k].phase_deg.push_back(ph * 180.0 / M_PI);
            }
        }
    }
    std::filesystem::remove_all(dir);
    for (const SpiceResponse& r : out)
        if (r.freq_hz.empty()) throw std::runtime_error("ngspice wrote no data");
    return out;
}

nlohmann::json run_scipy_fit(const nlohmann::json& problem, const std::string& tag) {
    const auto dir = scratch_dir(tag);
    std::ofstream(dir / "problem.json") << problem.dump();
    const std::string script = std::string(AMPBENCH_TEST_DATA_DIR) + "/fit/rational_lsq.py";
    const std::string cmd = fmt::format("/usr/bin/python3 '{}' '{}' > '{}' 2> '{}'", script,
                                        (dir / "problem.json").string(), (dir / "result.json").string(),
                                        (dir / "python.log").string());
    const int rc = std::system(cmd.c_str());
    const std::string result = slurp(dir / "result.json"), log = slurp(dir / "python.log");
    std::filesystem::remove_all(dir);
    if (rc != 0) throw std::runtime_error("scipy fit failed: " + log);
    return nlohmann::json::parse(result);
}

TrueCorners true_corners(const SpiceResponse& r) {
    TrueCorners t;
    std::size_t peak = 0;
    for (std::size_t i = 0; i < r.gain_db.size(); ++i)
        if (r.gain_db[i] > r.gain_db[peak]) peak = i;
    t.peak_db = r.gain_db[peak];
    const double level = t.peak_db - 20 * std::log10(std::sqrt(2.0));
    auto cross = [&](std::size_t a, std::size_t b) {
        const double u = (r.gain_db[a] - level) / (r.gain_db[a] - r.gain_db[b]);
        return std::exp(std::log(r.freq_hz[a]) + u * (std::log(r.freq_hz[b]) - std::log(r.freq_hz[a])));
    };
    for (std::size_t i = peak; i > 0; --i)
        if (r.gain_db[i - 1] < level) {
            t.f_low = cross(i, i - 1);
            t.has_low = true;
            break;
        }
    for (std::size_t i = peak; i + 1 < r.gain_db.size(); ++i)
        if (r.gain_db[i + 1] < level) {
            t.f_high = cross(i, i + 1);
            t.has_high = true;
            break;
        }
    return t;
}

}  // namespace ampbench::fit::testing
