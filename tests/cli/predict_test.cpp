// `ampbench predict` run in-process as a user would: table, JSON shape, bench loading, the
// tolerance band, and one-line errors with the input exit code.
#include <catch2/catch.hpp>

#include <filesystem>
#include <fstream>
#include <sstream>

#include <nlohmann/json.hpp>

#include "cli/app.h"

using nlohmann::json;

namespace {

struct Result {
    int code;
    std::string out, err;
};

Result predict(std::vector<std::string> args) {
    std::ostringstream out, err;
    args.insert(args.begin(), "predict");
    const int code = ampbench::cli::run(args, out, err);
    return {code, out.str(), err.str()};
}

std::string sample(const std::string& name) {
    // Built in two steps: GCC 12 warns falsely (-Warray-bounds) on string(literal) + literal at -O2.
    std::string path = AMPBENCH_SOURCE_DIR;
    path += "/sample_sessions/" + name;
    return path;
}

}  // namespace

TEST_CASE("predict prints a table for every sample design", "[cli][predict]") {
    for (const char* stem : {"pa1", "sb3", "ld2"}) {
        const Result r = predict({sample(std::string(stem) + ".design.json")});
        INFO(r.err);
        CHECK(r.code == 0);
        CHECK(r.err.empty());
        CHECK(r.out.find("midband gain") != std::string::npos);
        CHECK(r.out.find("Q1") != std::string::npos);
        CHECK(r.out.find("Harrow Vale Electronics") != std::string::npos);
    }
}

TEST_CASE("predict --json has the documented shape", "[cli][predict]") {
    const Result r = predict({sample("ld2.design.json"), "--json"});
    REQUIRE(r.code == 0);
    const json j = json::parse(r.out);
    const json& op = j.at("operating_point");
    CHECK(op.at("nodes").at("c1").get<double>() > 0);
    for (const char* ref : {"Q1", "Q2"}) {
        const json& q = op.at("devices").at(ref);
        for (const char* key : {"ic_a", "ib_a", "vbe_v", "vce_v", "hfe", "beta0"})
            CHECK(q.at(key).is_number());
        CHECK(q.at("region") == "active");
    }
    CHECK(op.at("supply_current_a").get<double>() > 0);
    const json& resp = j.at("response");
    for (const char* key : {"midband_gain", "midband_gain_db", "midband_phase_deg", "midband_freq_hz",
                            "peaking_db", "f_low_hz", "f_high_hz", "input_impedance_ohm",
                            "output_impedance_ohm", "max_output_vpp"})
        CHECK(resp.at(key).is_number());
    CHECK(resp.at("inverting") == true);
    CHECK_FALSE(j.contains("tolerance"));
}

TEST_CASE("predict --bench adds the probe loading", "[cli][predict]") {
    const Result bare = predict({sample("pa1.design.json"), "--json"});
    const Result loaded =
        predict({sample("pa1.design.json"), "--bench", sample("virtual.bench.json"), "--json"});
    REQUIRE(bare.code == 0);
    REQUIRE(loaded.code == 0);
    const double f_bare = json::parse(bare.out)["response"]["f_high_hz"];
    const double f_loaded = json::parse(loaded.out)["response"]["f_high_hz"];
    CHECK(f_loaded < f_bare);
}

TEST_CASE("predict --monte-carlo adds the tolerance band, replayable by seed", "[cli][predict]") {
    const auto args = std::vector<std::string>{sample("sb3.design.json"), "--json", "--monte-carlo",
                                               "60", "--seed", "9"};
    const Result a = predict(args);
    const Result b = predict(args);
    REQUIRE(a.code == 0);
    CHECK(a.out == b.out);
    const json t = json::parse(a.out).at("tolerance");
    CHECK(t.at("runs") == 60);
    CHECK(t.at("seed") == 9);
    CHECK(t.at("coverage") == 0.99);
    const json& g = t.at("quantities").at("midband_gain_db");
    CHECK(g.at("low").get<double>() <= g.at("median").get<double>());
    CHECK(g.at("median").get<double>() <= g.at("high").get<double>());
    REQUIRE(t.at("sensitivity").is_array());
    REQUIRE_FALSE(t.at("sensitivity").empty());
    CHECK(t.at("sensitivity")[0].at("ref").is_string());
    CHECK(t.at("sensitivity")[0].at("share").is_number());

    const Result table = predict({sample("sb3.design.json"), "--monte-carlo", "60"});
    CHECK(table.out.find("Tolerance band") != std::string::npos);
}

TEST_CASE("predict errors: one line on stderr, exit code 2, nothing on stdout", "[cli][predict]") {
    const auto dir = std::filesystem::temp_directory_path() / "ampbench-predict-cli";
    std::filesystem::create_directories(dir);
    const std::string bad = (dir / "bad.design.json").string();
    std::ifstream in(sample("pa1.design.json"));
    std::stringstream text;
    text << in.rdbuf();
    std::string s = text.str();
    s.replace(s.find("\"5k6\""), 5, "\"5k6k\"");
    std::ofstream(bad) << s;
    const Result r = predict({bad});
    CHECK(r.code == 2);
    CHECK(r.out.empty());
    CHECK(r.err.find("bad.design.json") != std::string::npos);
    CHECK(r.err.find("R3") != std::string::npos);
    CHECK(std::count(r.err.begin(), r.err.end(), '\n') == 1);

    const Result missing = predict({(dir / "none.design.json").string()});
    CHECK(missing.code == 2);
    CHECK(missing.out.empty());

    const Result usage = predict({sample("pa1.design.json"), "--monte-carlo", "1"});
    CHECK(usage.code == 1);
    std::filesystem::remove_all(dir);
}
