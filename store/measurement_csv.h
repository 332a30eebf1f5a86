// The measurement CSV of DESIGN.md §4.4, read for import and written for export:
// freq_hz,gain_db,phase_deg[,gain_db_sd,phase_deg_sd]  or  freq_hz,vin_vpp,vout_vpp[,phase_deg].
#pragma once

#include <optional>
#include <string>
#include <string_view>
#include <vector>

#include "store/archive.h"

namespace ampbench::store {

enum class CsvForm { gain_phase, amplitudes };

struct CsvReading {
    int line = 0;  // line number in the file, for messages
    double freq_hz = 0.0;
    double gain_db = 0.0;  // for the amplitude form: 20·log10(vout_vpp / vin_vpp)
    std::optional<double> phase_deg, gain_db_sd, phase_deg_sd;
    std::optional<double> vin_vpp, vout_vpp;
};

struct MeasurementCsv {
    CsvForm form = CsvForm::gain_phase;
    std::vector<CsvReading> readings;
};

// Parses the whole text; every bad row is collected and one InputError names `origin`, the
// first bad line and how many there are, so nothing is half-imported.
MeasurementCsv parse_measurement_csv(std::string_view text, const std::string& origin);
MeasurementCsv read_measurement_csv(const std::string& path);

// The first form with both uncertainty columns, one row per point in frequency order; numbers in
// the shortest text that reads back to the same double; unknown values left empty.
std::string write_measurement_csv(const std::vector<Point>& points, const std::string& comment);

// A point holding one CSV reading (per-channel peak amplitudes from the amplitude form).
Point point_from_reading(const CsvReading& reading);

}  // namespace ampbench::store
