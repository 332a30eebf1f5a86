// The measurement CSV of DESIGN.md §4.4: both forms, comments, bad rows, exact round trip.
#include <catch2/catch.hpp>

#include "core/errors.h"
#include "core/random.h"
#include "store/measurement_csv.h"

using namespace ampbench;
using namespace ampbench::store;

TEST_CASE("the gain and phase form with uncertainties", "[store][csv]") {
    const auto csv = parse_measurement_csv(
        "# HVE-PA1 by hand, bay 3\r\n"
        "freq_hz,gain_db,phase_deg,gain_db_sd,phase_deg_sd\r\n"
        "20,34.01,131.2,0.04,0.3\r\n"
        "\r\n"
        "1000, 40.03 ,-179.1,,\r\n",
        "hand.csv");
    CHECK(csv.form == CsvForm::gain_phase);
    REQUIRE(csv.readings.size() == 2);
    CHECK(csv.readings[0].line == 3);
    CHECK(csv.readings[0].phase_deg_sd == 0.3);
    CHECK(csv.readings[1].gain_db == 40.03);
    CHECK_FALSE(csv.readings[1].gain_db_sd);
}

TEST_CASE("magnitude-only files omit phase", "[store][csv]") {
    const auto csv = parse_measurement_csv("freq_hz,gain_db\n100,12.5\n", "m.csv");
    REQUIRE(csv.readings.size() == 1);
    CHECK_FALSE(csv.readings[0].phase_deg);
}

TEST_CASE("the amplitude form gives gain as 20 log10(vout/vin)", "[store][csv]") {
    const auto csv = parse_measurement_csv(
        "freq_hz,vin_vpp,vout_vpp,phase_deg\n1000,0.1,0.2,-180\n50,0.1,10,\n", "amp.csv");
    CHECK(csv.form == CsvForm::amplitudes);
    REQUIRE(csv.readings.size() == 2);
    // common practice: doubling a voltage is +6.0206 dB; a factor of 100 is +40 dB.
    CHECK(csv.readings[0].gain_db == Approx(6.0206).margin(1e-4));
    CHECK(csv.readings[1].gain_db == Approx(40.0).margin(1e-12));
    const Point p = point_from_reading(csv.readings[0]);
    CHECK(p.in_amplitude_v == Approx(0.05));
    CHECK(p.out_amplitude_v == Approx(0.1));
}

TEST_CASE("bad rows are all reported with their line numbers", "[store][csv]") {
    const std::string text =
        "freq_hz,gain_db,phase_deg\n"
        "100,40,-180\n"
        "abc,40,-180\n"    // line 3
        "200,40\n"         // line 4
        "300,4k7,-180\n"   // line 5: no SI prefixes in measurement files
        "-5,40,-180\n"     // line 6
        "400,40,-180\n";
    try {
        parse_measurement_csv(text, "bad.csv");
        FAIL("bad rows were accepted");
    } catch (const InputError& e) {
        const std::string message = e.what();
        CHECK(e.file() == "bad.csv");
        CHECK(e.field() == "line 3");
        CHECK_THAT(message, Catch::Contains("'abc' is not a number"));
        CHECK_THAT(message, Catch::Contains("line 4: 2 fields where the header has 3"));
        CHECK_THAT(message, Catch::Contains("line 5: gain_db: '4k7' is not a number"));
        CHECK_THAT(message, Catch::Contains("line 6: freq_hz"));
        CHECK_THAT(message, Catch::Contains("4 bad rows; nothing imported"));
    }
}

TEST_CASE("bad headers are refused", "[store][csv]") {
    CHECK_THROWS_WITH(parse_measurement_csv("freq,gain\n1,2\n", "h.csv"),
                      Catch::Contains("h.csv: line 1: unknown column 'freq'"));
    CHECK_THROWS_WITH(parse_measurement_csv("freq_hz,gain_db,vin_vpp,vout_vpp\n", "h.csv"),
                      Catch::Contains("the header must be"));
    CHECK_THROWS_WITH(parse_measurement_csv("freq_hz,vin_vpp\n1,2\n", "h.csv"),
                      Catch::Contains("the header must be"));
    CHECK_THROWS_WITH(parse_measurement_csv("# only a comment\n", "h.csv"),
                      Catch::Contains("no header"));
    CHECK_THROWS_WITH(parse_measurement_csv("freq_hz,gain_db\n", "h.csv"),
                      Catch::Contains("no readings"));
}

TEST_CASE("written CSV reads back to the same doubles", "[store][csv]") {
    Random rng(31);
    std::vector<Point> points;
    for (int i = 0; i < 200; ++i) {
        Point p;
        p.freq_hz = std::pow(10.0, rng.uniform(0.0, 7.0));
        p.gain_db = rng.uniform(-60.0, 60.0);
        if (i % 3) p.phase_deg = rng.uniform(-180.0, 180.0);
        if (i % 4) p.gain_db_sd = rng.uniform(0.0, 0.1);
        if (i % 5) p.phase_deg_sd = rng.uniform(0.0, 2.0);
        points.push_back(p);
    }
    const std::string text = write_measurement_csv(points, "session 7\nwith a newline");
    CHECK(text.rfind("# session 7 with a newline\nfreq_hz,gain_db,phase_deg,gain_db_sd,phase_deg_sd\n", 0) == 0);
    const auto back = parse_measurement_csv(text, "round.csv");
    REQUIRE(back.readings.size() == points.size());
    std::sort(points.begin(), points.end(),
              [](const Point& a, const Point& b) { return a.freq_hz < b.freq_hz; });
    for (size_t i = 0; i < points.size(); ++i) {
        CHECK(back.readings[i].freq_hz == points[i].freq_hz);
        CHECK(back.readings[i].gain_db == points[i].gain_db);
        CHECK(back.readings[i].phase_deg == points[i].phase_deg);
        CHECK(back.readings[i].gain_db_sd == points[i].gain_db_sd);
        CHECK(back.readings[i].phase_deg_sd == points[i].phase_deg_sd);
    }
}
