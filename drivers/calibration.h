// Calibration state of a bench's instruments and probes against their cal_due dates, and the
// bench's policy for past-due ones (limits.calibration: warn or refuse).
#pragma once

#include <string>
#include <vector>

#include "core/bench_file.h"

namespace ampbench::drivers {

enum class CalibrationStatus { not_given, in_date, past_due };

struct CalibrationState {
    std::string item;     // "scope", "scope channel 1 probe"
    std::string field;    // "scope.cal_due"
    std::string cal_due;  // as written
    CalibrationStatus status = CalibrationStatus::not_given;
    std::string describe() const;  // "in date until 2027-01-15", "past due since ...", "no date given"
};

// Today's date (UTC) as YYYY-MM-DD.
std::string today_utc();

// InputError naming the field when the date is not YYYY-MM-DD (a real calendar date).
CalibrationState calibration_state(const std::string& item, const std::string& field,
                                   const std::string& cal_due, const std::string& today);
CalibrationState calibration_state(const InstrumentSpec& spec, const std::string& today);

// Every instrument present and every scope probe with a date.
std::vector<CalibrationState> bench_calibration(const BenchFile& bench, const std::string& today);

// Applies limits.calibration: past-due items are returned as warnings ("warn") or an InputError
// naming the bench file and the first past-due field ("refuse").
std::vector<std::string> enforce_calibration(const BenchFile& bench, const std::string& today);

}  // namespace ampbench::drivers
