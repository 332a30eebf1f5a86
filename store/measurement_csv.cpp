// Strict CSV reading (plain numbers only, every row checked before anything is used) and
// round-trip-exact CSV writing for the measurement files of DESIGN.md §4.4.
#include "store/measurement_csv.h"

#include <algorithm>
#include <charconv>
#include <cmath>
#include <fstream>
#include <map>
#include <sstream>

#include <fmt/format.h>

#include "core/errors.h"

namespace ampbench::store {

namespace {

std::string_view trim(std::string_view s) {
    while (!s.empty() && (s.front() == ' ' || s.front() == '\t')) s.remove_prefix(1);
    while (!s.empty() && (s.back() == ' ' || s.back() == '\t' || s.back() == '\r'))
        s.remove_suffix(1);
    return s;
}

std::vector<std::string_view> split(std::string_view line) {
    std::vector<std::string_view> out;
    size_t start = 0;
    while (true) {
        const size_t comma = line.find(',', start);
        out.push_back(trim(line.substr(start, comma == std::string_view::npos ? line.npos
                                                                              : comma - start)));
        if (comma == std::string_view::npos) break;
        start = comma + 1;
    }
    return out;
}

// A plain decimal or exponent number, nothing else (no SI prefixes in measurement files).
std::optional<double> parse_number(std::string_view s) {
    if (s.empty()) return std::nullopt;
    if (s.front() == '+') s.remove_prefix(1);
    double value = 0.0;
    const auto [end, ec] = std::from_chars(s.data(), s.data() + s.size(), value);
    if (ec != std::errc() || end != s.data() + s.size() || !std::isfinite(value))
        return std::nullopt;
    return value;
}

enum class Column { freq_hz, gain_db, phase_deg, gain_db_sd, phase_deg_sd, vin_vpp, vout_vpp };

const std::map<std::string_view, Column>& column_names() {
    static const std::map<std::string_view, Column> names = {
        {"freq_hz", Column::freq_hz},         {"gain_db", Column::gain_db},
        {"phase_deg", Column::phase_deg},     {"gain_db_sd", Column::gain_db_sd},
        {"phase_deg_sd", Column::phase_deg_sd}, {"vin_vpp", Column::vin_vpp},
        {"vout_vpp", Column::vout_vpp}};
    return names;
}

std::string number_text(const std::optional<double>& v) {
    return v ? fmt::format("{}", *v) : std::string();
}

}  // namespace

MeasurementCsv parse_measurement_csv(std::string_view text, const std::string& origin) {
    MeasurementCsv result;
    std::vector<Column> columns;
    std::vector<std::string> problems;
    int first_bad_line = 0;
    auto problem = [&](int line, std::string what) {
        if (first_bad_line == 0) first_bad_line = line;
        problems.push_back(fmt::format("line {}: {}", line, what));
    };

    int line_no = 0;
    size_t pos = 0;
    bool have_header = false;
    while (pos <= text.size()) {
        const size_t nl = text.find('\n', pos);
        const std::string_view raw =
            text.substr(pos, nl == std::string_view::npos ? text.npos : nl - pos);
        pos = nl == std::string_view::npos ? text.size() + 1 : nl + 1;
        ++line_no;
        const std::string_view line = trim(raw);
        if (line.empty() || line.front() == '#') continue;
        const auto fields = split(line);

        if (!have_header) {
            have_header = true;
            std::vector<bool> seen(column_names().size(), false);
            for (const auto name : fields) {
                const auto it = column_names().find(name);
                if (it == column_names().end())
                    throw InputError(origin, fmt::format("line {}", line_no),
                                     fmt::format("unknown column '{}' in the header", name));
                const auto index = static_cast<size_t>(it->second);
                if (seen[index])
                    throw InputError(origin, fmt::format("line {}", line_no),
                                     fmt::format("column '{}' appears twice", name));
                seen[index] = true;
                columns.push_back(it->second);
            }
            auto has = [&](Column c) { return seen[static_cast<size_t>(c)]; };
            const bool gain_form = has(Column::gain_db);
            const bool amp_form = has(Column::vin_vpp) || has(Column::vout_vpp);
            if (!has(Column::freq_hz) || gain_form == amp_form ||
                (amp_form && !(has(Column::vin_vpp) && has(Column::vout_vpp))) ||
                (amp_form && (has(Column::gain_db_sd) || has(Column::phase_deg_sd))))
                throw InputError(
                    origin, fmt::format("line {}", line_no),
                    "the header must be freq_hz,gain_db,phase_deg[,gain_db_sd,phase_deg_sd] "
                    "or freq_hz,vin_vpp,vout_vpp[,phase_deg]");
            result.form = gain_form ? CsvForm::gain_phase : CsvForm::amplitudes;
            continue;
        }

        if (fields.size() != columns.size()) {
            problem(line_no, fmt::format("{} fields where the header has {}", fields.size(),
                                         columns.size()));
            continue;
        }
        CsvReading r;
        r.line = line_no;
        bool ok = true;
        for (size_t i = 0; i < columns.size() && ok; ++i) {
            const Column c = columns[i];
            const auto name = std::find_if(column_names().begin(), column_names().end(),
                                           [&](const auto& kv) { return kv.second == c; })
                                  ->first;
            const bool optional = c == Column::phase_deg || c == Column::gain_db_sd ||
                                  c == Column::phase_deg_sd;
            if (fields[i].empty() && optional) continue;
            const auto value = parse_number(fields[i]);
            if (!value) {
                problem(line_no, fmt::format("{}: '{}' is not a number", name, fields[i]));
                ok = false;
                break;
            }
            const bool must_be_positive =
                c == Column::freq_hz || c == Column::vin_vpp || c == Column::vout_vpp;
            if (must_be_positive && *value <= 0) {
                problem(line_no, fmt::format("{}: {} must be above zero", name, fields[i]));
                ok = false;
                break;
            }
            if ((c == Column::gain_db_sd || c == Column::phase_deg_sd) && *value < 0) {
                problem(line_no, fmt::format("{}: {} is a negative uncertainty", name, fields[i]));
                ok = false;
                break;
            }
            switch (c) {
                case Column::freq_hz: r.freq_hz = *value; break;
                case Column::gain_db: r.gain_db = *value; break;
                case Column::phase_deg: r.phase_deg = *value; break;
                case Column::gain_db_sd: r.gain_db_sd = *value; break;
                case Column::phase_deg_sd: r.phase_deg_sd = *value; break;
                case Column::vin_vpp: r.vin_vpp = *value; break;
                case Column::vout_vpp: r.vout_vpp = *value; break;
            }
        }
        if (!ok) continue;
        if (result.form == CsvForm::amplitudes) r.gain_db = 20.0 * std::log10(*r.vout_vpp / *r.vin_vpp);
        result.readings.push_back(r);
    }

    if (!have_header) throw InputError(origin, "", "no header row (and no readings)");
    if (!problems.empty()) {
        std::string text_out = problems.front().substr(problems.front().find(':') + 2);
        for (size_t i = 1; i < problems.size() && i < 5; ++i) text_out += "; " + problems[i];
        if (problems.size() > 5) text_out += fmt::format("; and {} more", problems.size() - 5);
        text_out += fmt::format(" ({} bad row{}; nothing imported)", problems.size(),
                                problems.size() == 1 ? "" : "s");
        throw InputError(origin, fmt::format("line {}", first_bad_line), text_out);
    }
    if (result.readings.empty()) throw InputError(origin, "", "no readings after the header");
    return result;
}

MeasurementCsv read_measurement_csv(const std::string& path) {
    std::ifstream in(path, std::ios::binary);
    if (!in) throw InputError(path, "", "cannot open file");
    std::ostringstream text;
    text << in.rdbuf();
    if (in.bad()) throw InputError(path, "", "cannot read file");
    return parse_measurement_csv(text.str(), path);
}

std::string write_measurement_csv(const std::vector<Point>& points, const std::string& comment) {
    std::vector<const Point*> sorted;
    for (const auto& p : points) sorted.push_back(&p);
    std::stable_sort(sorted.begin(), sorted.end(),
                     [](const Point* a, const Point* b) { return a->freq_hz < b->freq_hz; });
    std::string out;
    if (!comment.empty()) {
        std::string safe = comment;
        std::replace_if(safe.begin(), safe.end(),
                        [](char c) { return c == '\n' || c == '\r'; }, ' ');
        out += "# " + safe + "\n";
    }
    out += "freq_hz,gain_db,phase_deg,gain_db_sd,phase_deg_sd\n";
    for (const Point* p : sorted)
        out += fmt::format("{},{},{},{},{}\n", p->freq_hz, p->gain_db, number_text(p->phase_deg),
                           number_text(p->gain_db_sd), number_text(p->phase_deg_sd));
    return out;
}

Point point_from_reading(const CsvReading& reading) {
    Point p;
    p.freq_hz = reading.freq_hz;
    p.gain_db = reading.gain_db;
    p.gain_db_sd = reading.gain_db_sd;
    p.phase_deg = reading.phase_deg;
    p.phase_deg_sd = reading.phase_deg_sd;
    if (reading.vin_vpp) p.in_amplitude_v = *reading.vin_vpp / 2.0;
    if (reading.vout_vpp) p.out_amplitude_v = *reading.vout_vpp / 2.0;
    p.flags = "imported";
    return p;
}

}  // namespace ampbench::store
