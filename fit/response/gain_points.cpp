// The measurement-CSV reader and the checks every gain-point set goes through.
#include "fit/response/gain_points.h"

#include <algorithm>
#include <cmath>
#include <fstream>
#include <sstream>

#include <fmt/format.h>

#include "core/errors.h"

namespace ampbench::fit {
namespace {

std::string trim(std::string_view s) {
    const auto b = s.find_first_not_of(" \t\r");
    if (b == std::string_view::npos) return {};
    const auto e = s.find_last_not_of(" \t\r");
    return std::string(s.substr(b, e - b + 1));
}

std::vector<std::string> split_csv(std::string_view line) {
    std::vector<std::string> out;
    std::size_t start = 0;
    while (true) {
        const auto comma = line.find(',', start);
        out.push_back(trim(line.substr(start, comma == std::string_view::npos ? std::string_view::npos : comma - start)));
        if (comma == std::string_view::npos) break;
        start = comma + 1;
    }
    return out;
}

}  // namespace

GainData prepare_gain_data(GainData data) {
    const std::string& where = data.origin.empty() ? std::string("gain points") : data.origin;
    for (std::size_t i = 0; i < data.points.size(); ++i) {
        const GainPoint& p = data.points[i];
        if (!std::isfinite(p.freq_hz) || p.freq_hz <= 0.0)
            throw FitInputError(fmt::format("{}: point {}: frequency must be a positive number, got {}", where, i + 1, p.freq_hz));
        if (!std::isfinite(p.gain_db))
            throw FitInputError(fmt::format("{}: point {} at {} Hz: gain is not finite (zero amplitude?)", where, i + 1, p.freq_hz));
        if (data.has_phase && !std::isfinite(p.phase_deg))
            throw FitInputError(fmt::format("{}: point {} at {} Hz: phase is not finite", where, i + 1, p.freq_hz));
        if (data.has_sd && (!(p.gain_db_sd > 0.0) || (data.has_phase && !(p.phase_deg_sd > 0.0))))
            throw FitInputError(fmt::format("{}: point {} at {} Hz: standard deviations must be positive", where, i + 1, p.freq_hz));
    }
    std::stable_sort(data.points.begin(), data.points.end(),
                     [](const GainPoint& a, const GainPoint& b) { return a.freq_hz < b.freq_hz; });
    for (std::size_t i = 1; i < data.points.size(); ++i)
        if (data.points[i].freq_hz == data.points[i - 1].freq_hz)
            throw FitInputError(fmt::format("{}: frequency {} Hz appears more than once", where, data.points[i].freq_hz));
    if (data.points.size() < 2)
        throw FitInputError(fmt::format("{}: {} frequency given, a response fit needs several", where, data.points.size()));
    return data;
}

GainData parse_gain_csv(std::string_view text, const std::string& origin) {
    std::istringstream in{std::string(text)};
    std::string line;
    int line_no = 0;
    std::vector<std::string> header;
    int col_f = -1, col_g = -1, col_p = -1, col_gsd = -1, col_psd = -1, col_vin = -1, col_vout = -1;
    GainData data;
    data.origin = origin;
    while (std::getline(in, line)) {
        ++line_no;
        const std::string t = trim(line);
        if (t.empty() || t[0] == '#') continue;
        const std::vector<std::string> cells = split_csv(t);
        if (header.empty()) {
            header = cells;
            for (std::size_t c = 0; c < cells.size(); ++c) {
                const std::string& h = cells[c];
                int* slot = h == "freq_hz" ? &col_f : h == "gain_db" ? &col_g : h == "phase_deg" ? &col_p
                          : h == "gain_db_sd" ? &col_gsd : h == "phase_deg_sd" ? &col_psd
                          : h == "vin_vpp" ? &col_vin : h == "vout_vpp" ? &col_vout : nullptr;
                if (!slot) throw InputError(origin, fmt::format("line {}", line_no), fmt::format("unknown column '{}'", h));
                if (*slot >= 0) throw InputError(origin, fmt::format("line {}", line_no), fmt::format("column '{}' given twice", h));
                *slot = static_cast<int>(c);
            }
            if (col_f < 0) throw InputError(origin, fmt::format("line {}", line_no), "header needs a freq_hz column");
            const bool ratio_form = col_vin >= 0 || col_vout >= 0;
            if (ratio_form == (col_g >= 0))
                throw InputError(origin, fmt::format("line {}", line_no), "header needs either gain_db or vin_vpp and vout_vpp");
            if (ratio_form && (col_vin < 0 || col_vout < 0))
                throw InputError(origin, fmt::format("line {}", line_no), "header needs both vin_vpp and vout_vpp");
            if (col_p >= 0 && (col_gsd >= 0) != (col_psd >= 0))
                throw InputError(origin, fmt::format("line {}", line_no), "give gain_db_sd and phase_deg_sd together");
            if (col_p < 0 && col_psd >= 0)
                throw InputError(origin, fmt::format("line {}", line_no), "phase_deg_sd without phase_deg");
            data.has_phase = col_p >= 0;
            data.has_sd = col_gsd >= 0;
            continue;
        }
        if (cells.size() != header.size())
            throw InputError(origin, fmt::format("line {}", line_no),
                             fmt::format("{} fields, the header has {}", cells.size(), header.size()));
        auto number = [&](int col) {
            if (col < 0) return 0.0;
            const std::string& cell = cells[static_cast<std::size_t>(col)];
            std::size_t used = 0;
            double v = 0;
            try {
                v = std::stod(cell, &used);
            } catch (const std::exception&) {
                used = 0;
            }
            if (used == 0 || used != cell.size())
                throw InputError(origin, fmt::format("line {}, column {}", line_no, header[static_cast<std::size_t>(col)]),
                                 fmt::format("'{}' is not a number", cell));
            return v;
        };
        GainPoint p;
        p.freq_hz = number(col_f);
        if (col_g >= 0) {
            p.gain_db = number(col_g);
        } else {
            const double vin = number(col_vin), vout = number(col_vout);
            p.gain_db = vin > 0 && vout > 0 ? 20.0 * std::log10(vout / vin) : std::nan("");
            if (!(vin > 0) || !(vout > 0))
                throw FitInputError(fmt::format("{}: line {}: amplitudes must be positive (vin_vpp {}, vout_vpp {})",
                                                origin, line_no, vin, vout));
        }
        p.phase_deg = number(col_p);
        p.gain_db_sd = number(col_gsd);
        p.phase_deg_sd = number(col_psd);
        data.points.push_back(p);
    }
    if (header.empty()) throw InputError(origin, "", "no header row");
    return prepare_gain_data(std::move(data));
}

GainData read_gain_csv(const std::string& path) {
    std::ifstream in(path, std::ios::binary);
    if (!in) throw InputError(path, "", "cannot open the file");
    std::ostringstream s;
    s << in.rdbuf();
    return parse_gain_csv(s.str(), path);
}

}  // namespace ampbench::fit
