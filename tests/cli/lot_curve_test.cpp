// `ampbench lot curve`: JSON rows equal the library's OC values, the table reads, bad plans are
// one-line usage errors.
#include <catch2/catch.hpp>

#include <nlohmann/json.hpp>

#include "cli_support.h"
#include "fit/lot/sampling.h"

using namespace ampbench;
using namespace ampbench::cli::testing;
using Catch::Matchers::Contains;

TEST_CASE("lot curve --json prints the OC rows", "[cli][lot]") {
    const auto r = run_cli({"lot", "curve", "--n", "32", "--c", "1", "--qty", "500", "--json"});
    REQUIRE(r.code == 0);
    const auto doc = nlohmann::json::parse(r.out);
    CHECK(doc["n"] == 32);
    CHECK(doc["c"] == 1);
    CHECK(doc["qty"] == 500);
    REQUIRE(doc["oc"].size() == lot::default_oc_grid().size());
    const auto& row = doc["oc"][1];
    CHECK(row["p"].get<double>() == 0.01);
    CHECK(row["accept_binomial"].get<double>() == lot::accept_binomial(32, 1, 0.01));
    CHECK(row["accept_hypergeometric"].get<double>() == lot::accept_hypergeometric(500, 5, 32, 1));
    CHECK(row["lot_defectives"] == 5);
    CHECK(lot::accept_binomial(32, 1, doc["p_accept_95"].get<double>()) == Approx(0.95).margin(1e-9));

    const auto stream = run_cli({"lot", "curve", "--n", "32", "--c", "1", "--json"});
    REQUIRE(stream.code == 0);
    const auto s = nlohmann::json::parse(stream.out);
    CHECK(s["qty"].is_null());
    CHECK(s["oc"][0]["accept_hypergeometric"].is_null());
}

TEST_CASE("lot curve prints a readable table", "[cli][lot]") {
    const auto r = run_cli({"lot", "curve", "--n", "32", "--c", "1", "--qty", "500"});
    REQUIRE(r.code == 0);
    CHECK_THAT(r.out, Contains("n = 32, c = 1, lot of 500") && Contains("accept, binomial") &&
                          Contains("1.0 %") && Contains("(  5 bad)"));
}

TEST_CASE("lot curve refuses a plan that cannot work", "[cli][lot]") {
    const auto same = run_cli({"lot", "curve", "--n", "32", "--c", "32"});
    CHECK(same.code == 1);
    CHECK_THAT(same.err, Contains("--c 32 must be below --n 32"));
    CHECK(same.err.find('\n') == same.err.size() - 1);
    const auto big = run_cli({"lot", "curve", "--n", "32", "--c", "1", "--qty", "20"});
    CHECK(big.code == 1);
    CHECK_THAT(big.err, Contains("exceeds the lot quantity --qty 20"));
    CHECK(run_cli({"lot", "curve", "--n", "32"}).code == 1);
    CHECK(run_cli({"lot", "curve", "--n", "x", "--c", "1"}).code == 1);
    CHECK(run_cli({"lot"}).code == 1);
}
