// Tests for the value syntax (DESIGN.md §4.1) and the engineering formatter.
#include <catch2/catch.hpp>

#include "core/errors.h"
#include "core/value.h"

using ampbench::InputError;
using ampbench::format_eng;
using ampbench::parse_tolerance;
using ampbench::parse_value;
using Catch::Matchers::Contains;

TEST_CASE("plain numbers and SI prefixes", "[core][value]") {
    CHECK(parse_value("470", "f") == Approx(470));
    CHECK(parse_value("1e-6", "f") == Approx(1e-6));
    CHECK(parse_value("-2.5", "f") == Approx(-2.5));
    CHECK(parse_value(".5", "f") == Approx(0.5));
    CHECK(parse_value("2.2u", "f") == Approx(2.2e-6));
    CHECK(parse_value("47k", "f") == Approx(47e3));
    CHECK(parse_value("50m", "f") == Approx(0.05));  // m is milli
    CHECK(parse_value("1M", "f") == Approx(1e6));    // M is mega
    CHECK(parse_value("3p", "f") == Approx(3e-12));
    CHECK(parse_value("1G", "f") == Approx(1e9));
    CHECK(parse_value("2\xC2\xB5", "f") == Approx(2e-6));  // MICRO SIGN
    CHECK(parse_value("2\xCE\xBC", "f") == Approx(2e-6));  // GREEK MU
}

TEST_CASE("IEC 60062 letter codes", "[core][value]") {
    // Source: IEC 60062, letter in place of the decimal point (4k7 = 4.7 kΩ, 2R2 = 2.2 Ω).
    CHECK(parse_value("4k7", "f") == Approx(4700));
    CHECK(parse_value("2R2", "f") == Approx(2.2));
    CHECK(parse_value("R47", "f") == Approx(0.47));
    CHECK(parse_value("1n5", "f") == Approx(1.5e-9));
    CHECK(parse_value("2M2", "f") == Approx(2.2e6));
    CHECK(parse_value("4u7", "f") == Approx(4.7e-6));
}

TEST_CASE("optional units", "[core][value]") {
    CHECK(parse_value("47k\xCE\xA9", "f") == Approx(47e3));
    CHECK(parse_value("47kohm", "f") == Approx(47e3));
    CHECK(parse_value("10uF", "f") == Approx(10e-6));
    CHECK(parse_value("12V", "f") == Approx(12));
    CHECK(parse_value("20MHz", "f") == Approx(20e6));
    CHECK(parse_value("1F", "f") == Approx(1));
    CHECK(parse_value("4k7\xCE\xA9", "f") == Approx(4700));
}

TEST_CASE("malformed values are errors naming the field and text", "[core][value]") {
    for (const char* bad : {"4k7k", "1.2.3", "", "abc", "1e", "k", "4k7x", "12VV", "1e3k", "--1"}) {
        INFO(bad);
        try {
            parse_value(bad, "parts[2].value");
            FAIL("accepted");
        } catch (const InputError& e) {
            CHECK(e.field() == "parts[2].value");
            CHECK_THAT(std::string(e.what()), Contains("parts[2].value"));
            CHECK_THAT(std::string(e.what()), Contains(std::string("'") + bad + "'"));
        }
    }
}

TEST_CASE("tolerances", "[core][value]") {
    CHECK(parse_tolerance("5%", "tol") == Approx(0.05));
    CHECK(parse_tolerance("0.1%", "tol") == Approx(0.001));
    CHECK_THROWS_AS(parse_tolerance("5", "tol"), InputError);
    CHECK_THROWS_AS(parse_tolerance("x%", "tol"), InputError);
    CHECK_THROWS_AS(parse_tolerance("120%", "tol"), InputError);
}

TEST_CASE("engineering formatter", "[core][value]") {
    CHECK(format_eng(4700) == "4.7k");
    CHECK(format_eng(1e-6, "F") == "1uF");
    CHECK(format_eng(0.0123, "A") == "12.3mA");
    CHECK(format_eng(0) == "0");
    CHECK(format_eng(-2200, "\xCE\xA9") == "-2.2k\xCE\xA9");
    CHECK(format_eng(999.96e3, "", 4) == "1M");
    CHECK(format_eng(159.155, "Hz", 4) == "159.2Hz");
    // The formatter's output reads back through the parser.
    for (double v : {1.5e-12, 3.3e-9, 4.7e-6, 0.068, 1.0, 220.0, 4.7e3, 1e6, 2.2e9}) {
        INFO(v);
        CHECK(parse_value(format_eng(v, "", 6), "x") == Approx(v).epsilon(1e-6));
    }
}
