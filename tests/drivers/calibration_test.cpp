// Calibration dates against limits.calibration.
#include <catch2/catch.hpp>

#include "core/errors.h"
#include "drivers/calibration.h"

using namespace ampbench;
using namespace ampbench::drivers;

TEST_CASE("calibration dates: in date through the due day, past due after", "[calibration]") {
    CHECK(calibration_state("scope", "scope.cal_due", "2027-01-15", "2027-01-15").status == CalibrationStatus::in_date);
    CHECK(calibration_state("scope", "scope.cal_due", "2027-01-15", "2027-01-16").status == CalibrationStatus::past_due);
    CHECK(calibration_state("scope", "scope.cal_due", "", "2027-01-16").status == CalibrationStatus::not_given);
    // from memory: 2028 is a leap year, 2027 is not.
    CHECK_NOTHROW(calibration_state("m", "meter.cal_due", "2028-02-29", "2027-01-01"));
    for (const char* bad : {"2027-02-29", "2027-13-01", "27-01-01", "2027/01/01", "2027-01-32"})
        CHECK_THROWS_WITH(calibration_state("m", "meter.cal_due", bad, "2027-01-01"), Catch::Contains("meter.cal_due"));
    CHECK(today_utc().size() == 10);
}

TEST_CASE("past-due instruments warn or refuse by limits.calibration", "[calibration]") {
    BenchFile bench;
    bench.path = "lab.bench.json";
    bench.scope.present = true;
    bench.scope.role = "scope";
    bench.scope.cal_due = "2026-01-15";
    ScopeChannelSpec ch;
    ch.name = "1";
    ch.cal_due = "2030-01-01";
    bench.scope.channels.push_back(ch);
    bench.limits.calibration = "warn";
    const auto warnings = enforce_calibration(bench, "2026-06-01");
    REQUIRE(warnings.size() == 1);
    CHECK_THAT(warnings[0], Catch::Contains("scope") && Catch::Contains("2026-01-15"));
    CHECK(bench_calibration(bench, "2026-06-01").size() == 2);
    bench.limits.calibration = "refuse";
    CHECK_THROWS_WITH(enforce_calibration(bench, "2026-06-01"),
                      Catch::Contains("lab.bench.json") && Catch::Contains("scope.cal_due"));
    CHECK(enforce_calibration(bench, "2026-01-01").empty());
}
