// Tests for the JSON reader: numbers or value strings, errors naming file and key.
#include <catch2/catch.hpp>

#include "core/errors.h"
#include "core/json_read.h"

using namespace ampbench;
using Catch::Matchers::Contains;

TEST_CASE("numeric fields accept numbers and value strings", "[core][json]") {
    auto doc = JsonDocument::parse(R"({"a": 470, "b": "4k7", "c": {"d": ["1u", 2]}, "t": "5%"})",
                                   "x.json");
    JsonView v(doc);
    CHECK(v.number("a") == Approx(470));
    CHECK(v.number("b") == Approx(4700));
    CHECK(v.at("c").at("d").at(0).as_number() == Approx(1e-6));
    CHECK(v.at("c").at("d").at(1).as_number() == Approx(2));
    CHECK(v.tolerance_or("t", 0) == Approx(0.05));
    CHECK(v.number_or("missing", 3.0) == 3.0);
}

TEST_CASE("errors name the file and the key path", "[core][json]") {
    auto doc = JsonDocument::parse(R"({"parts": [{"value": "4k7k"}], "n": true})", "board.json");
    JsonView v(doc);
    try {
        v.at("parts").at(0).number("value");
        FAIL("accepted");
    } catch (const InputError& e) {
        CHECK(e.file() == "board.json");
        CHECK_THAT(std::string(e.what()), Contains("board.json") && Contains("parts[0].value"));
    }
    CHECK_THROWS_WITH(v.number("n"), Contains("board.json") && Contains("n"));
    CHECK_THROWS_WITH(v.number("absent"), Contains("absent") && Contains("missing"));
}

TEST_CASE("malformed JSON names the file, line and column", "[core][json]") {
    CHECK_THROWS_WITH(JsonDocument::parse("{\n  \"a\": 1,\n  oops\n}", "bench.json"),
                      Contains("bench.json") && Contains("line 3"));
    CHECK_THROWS_WITH(JsonDocument::load("/nonexistent/dir/x.json"),
                      Contains("/nonexistent/dir/x.json"));
}

TEST_CASE("format tags", "[core][json]") {
    auto ok = JsonDocument::parse(R"({"format": "ampbench-design/1"})", "d.json");
    CHECK_NOTHROW(JsonView(ok).require_format("ampbench-design/1"));
    auto newer = JsonDocument::parse(R"({"format": "ampbench-design/2"})", "d.json");
    CHECK_THROWS_WITH(JsonView(newer).require_format("ampbench-design/1"),
                      Contains("d.json") && Contains("newer"));
    auto other = JsonDocument::parse(R"({"format": "something-else/1"})", "d.json");
    CHECK_THROWS_WITH(JsonView(other).require_format("ampbench-design/1"),
                      Contains("expected 'ampbench-design/1'"));
}
