// SCPI reply parsers: identity, numbers, booleans, error entries and error classes.
#include <cmath>

#include <catch2/catch.hpp>

#include "drivers/scpi/parse.h"

using namespace ampbench::drivers;

TEST_CASE("*IDN? replies split into four fields", "[parse]") {
    // Source: IEEE 488.2-1992 §10.14 *IDN?: manufacturer, model, serial number (0 if none),
    // firmware level, separated by commas.
    const auto id = parse_identity("Harrow Vale Electronics,SG-10,PA1-2611-0042,1.02\r\n");
    REQUIRE(id);
    CHECK(id->manufacturer == "Harrow Vale Electronics");
    CHECK(id->model == "SG-10");
    CHECK(id->serial == "PA1-2611-0042");
    CHECK(id->firmware == "1.02");
    CHECK(parse_identity("HVE,M,0,0"));
    CHECK_FALSE(parse_identity("garbage"));
    CHECK_FALSE(parse_identity("a,b,c"));
    CHECK_FALSE(parse_identity("a,b,c,d,e"));
    CHECK_FALSE(parse_identity(",b,c,d"));
    CHECK_FALSE(parse_identity(std::string("a,b\x01,c,d")));
}

TEST_CASE("numeric replies in NR1, NR2 and NR3 forms", "[parse]") {
    // Source: IEEE 488.2-1992 §8.7.2-8.7.4 (NR1 integers, NR2 with a point, NR3 with exponent).
    CHECK(*parse_scpi_number("42\n") == 42.0);
    CHECK(*parse_scpi_number("+1.5") == 1.5);
    CHECK(*parse_scpi_number("-2.50E-03\r\n") == Approx(-2.5e-3));
    CHECK(*parse_scpi_number(".5") == 0.5);
    CHECK(*parse_scpi_number("5.") == 5.0);
    CHECK(*parse_scpi_number(" 1e3 ") == 1000.0);
    // Source: SCPI-1999 Vol. 1 §7.2.1.5: 9.9E37 is infinity, -9.9E37 negative infinity, 9.91E37 NaN.
    CHECK(std::isinf(*parse_scpi_number("9.9E37")));
    CHECK(*parse_scpi_number("-9.9E+37") < 0);
    CHECK(std::isnan(*parse_scpi_number("9.91E37")));
    CHECK(std::isinf(*parse_scpi_number("1e999")));
    CHECK(*parse_scpi_number("1e-999") == 0.0);
    for (const char* bad : {"", "abc", "1.2.3", "1e", "--1", "0x10", "1,2", "e5", ".", "12 V"})
        CHECK_FALSE(parse_scpi_number(bad));
}

TEST_CASE("boolean replies", "[parse]") {
    // Source: IEEE 488.2-1992 §8.7.2 (a <Boolean> response is NR1 1 or 0); SCPI-1999 §7.3 ON/OFF.
    CHECK(*parse_scpi_bool("1\n"));
    CHECK_FALSE(*parse_scpi_bool("0"));
    CHECK(*parse_scpi_bool("ON"));
    CHECK_FALSE(*parse_scpi_bool("off"));
    CHECK_FALSE(parse_scpi_bool("2"));
}

TEST_CASE("error queue entries and their SCPI-1999 classes", "[parse]") {
    // Source: SCPI-1999 Vol. 2 §21.8 SYSTem:ERRor? returns <code>,"<description>"; 0,"No error".
    const auto e = parse_error_entry("-113,\"Undefined header\"\n");
    REQUIRE(e);
    CHECK(e->code == -113);
    CHECK(e->message == "Undefined header");
    CHECK(parse_error_entry("0,\"No error\"")->is_none());
    CHECK(parse_error_entry("+0,\"No error\"")->is_none());
    CHECK_FALSE(parse_error_entry("no error"));
    CHECK_FALSE(parse_error_entry("1.5,\"x\""));
    // Source: SCPI-1999 Vol. 2 §21.8.9-21.8.12: -100 command, -200 execution, -300 device-specific,
    // -400 query errors.
    CHECK(scpi_error_class(-113) == "command error");
    CHECK(scpi_error_class(-222) == "execution error");
    CHECK(scpi_error_class(-350) == "device-specific error");
    CHECK(scpi_error_class(-410) == "query error");
    CHECK(scpi_error_class(17) == "instrument-specific error");
}

TEST_CASE("SCPI tokens match in long and short form", "[parse]") {
    // Source: SCPI-1999 Vol. 1 §6.2.1: a mnemonic may be sent in its short (upper-case part) or long form.
    CHECK(scpi_token_matches("SIN\n", "SINusoid"));
    CHECK(scpi_token_matches("sinusoid", "SINusoid"));
    CHECK(scpi_token_matches("\"DC\"", "DC"));
    CHECK_FALSE(scpi_token_matches("SQU", "SINusoid"));
}

TEST_CASE("ASCII number lists", "[parse]") {
    const auto v = parse_number_list("0.1,-0.2,3E-1\n");
    REQUIRE(v);
    CHECK(v->size() == 3);
    CHECK((*v)[2] == Approx(0.3));
    CHECK_FALSE(parse_number_list("1,,2"));
    CHECK(parse_number_list("")->empty());
}
