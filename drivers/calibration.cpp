// Calibration dates: strict YYYY-MM-DD; ISO dates compare as strings once validated.
#include "drivers/calibration.h"

#include <ctime>

#include <fmt/format.h>

#include "core/errors.h"

namespace ampbench::drivers {
namespace {

bool valid_date(const std::string& s) {
    if (s.size() != 10 || s[4] != '-' || s[7] != '-') return false;
    for (size_t i : {0, 1, 2, 3, 5, 6, 8, 9})
        if (s[i] < '0' || s[i] > '9') return false;
    const int year = std::stoi(s.substr(0, 4));
    const int month = std::stoi(s.substr(5, 2));
    const int day = std::stoi(s.substr(8, 2));
    if (month < 1 || month > 12 || day < 1) return false;
    static constexpr int kDays[] = {31, 28, 31, 30, 31, 30, 31, 31, 30, 31, 30, 31};
    const bool leap = (year % 4 == 0 && year % 100 != 0) || year % 400 == 0;
    return day <= kDays[month - 1] + (month == 2 && leap ? 1 : 0);
}

}  // namespace

std::string CalibrationState::describe() const {
    switch (status) {
        case CalibrationStatus::in_date: return "in date until " + cal_due;
        case CalibrationStatus::past_due: return "past due since " + cal_due;
        case CalibrationStatus::not_given: break;
    }
    return "no calibration date given";
}

std::string today_utc() {
    const std::time_t now = std::time(nullptr);
    std::tm tm{};
    gmtime_r(&now, &tm);
    char buf[16];
    std::strftime(buf, sizeof buf, "%Y-%m-%d", &tm);
    return buf;
}

CalibrationState calibration_state(const std::string& item, const std::string& field,
                                   const std::string& cal_due, const std::string& today) {
    CalibrationState st{item, field, cal_due, CalibrationStatus::not_given};
    if (cal_due.empty()) return st;
    if (!valid_date(cal_due)) throw InputError("", field, fmt::format("'{}' is not a date YYYY-MM-DD", cal_due));
    // The instrument is in date through its due day.
    st.status = cal_due < today ? CalibrationStatus::past_due : CalibrationStatus::in_date;
    return st;
}

CalibrationState calibration_state(const InstrumentSpec& spec, const std::string& today) {
    return calibration_state(spec.role, spec.role + ".cal_due", spec.cal_due, today);
}

std::vector<CalibrationState> bench_calibration(const BenchFile& bench, const std::string& today) {
    std::vector<CalibrationState> out;
    try {
        for (const InstrumentSpec* spec : bench.instruments()) out.push_back(calibration_state(*spec, today));
        if (bench.scope.present)
            for (const auto& ch : bench.scope.channels)
                if (!ch.cal_due.empty())
                    out.push_back(calibration_state("scope channel " + ch.name + " probe",
                                                    "scope.channels." + ch.name + ".cal_due", ch.cal_due, today));
    } catch (const InputError& e) {
        throw e.in_file(bench.path);
    }
    return out;
}

std::vector<std::string> enforce_calibration(const BenchFile& bench, const std::string& today) {
    std::vector<std::string> warnings;
    for (const auto& st : bench_calibration(bench, today)) {
        if (st.status != CalibrationStatus::past_due) continue;
        if (bench.limits.calibration == "refuse")
            throw InputError(bench.path, st.field,
                             fmt::format("{} calibration past due since {} (limits.calibration is refuse)", st.item,
                                         st.cal_due));
        warnings.push_back(fmt::format("{} calibration past due since {}", st.item, st.cal_due));
    }
    return warnings;
}

}  // namespace ampbench::drivers
