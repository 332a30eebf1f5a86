// SHA-256 against published vectors and coreutils, and content addresses of designs.
#include <catch2/catch.hpp>

#include <cstdio>
#include <fstream>

#include "core/errors.h"
#include "store/canonical_json.h"
#include "store/sha256.h"
#include "store_support.h"

using namespace ampbench::store;

TEST_CASE("SHA-256 matches the FIPS 180-4 example vectors", "[store][reference]") {
    // Source: NIST, FIPS 180-2 Appendix B.1-B.3 (the SHA-256 examples NIST publishes with
    // FIPS 180-4 as "Examples with Intermediate Values", SHA256.pdf).
    CHECK(sha256_hex("abc") ==
          "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad");
    CHECK(sha256_hex("abcdbcdecdefdefgefghfghighijhijkijkljklmklmnlmnomnopnopq") ==
          "248d6a61d20638b8e5c026930c3e6039a33ce45964ff2167f6ecedd419db06c1");
    CHECK(sha256_hex(std::string(1000000, 'a')) ==
          "cdc76e5c9914fb9281a1c7e284d73e67f1809a48a497200e046d39ccc7112cd0");
}

TEST_CASE("SHA-256 agrees with coreutils sha256sum", "[store][reference]") {
    testing::TempDir dir;
    const std::string path = dir.path("bytes.bin");
    std::string bytes;
    for (int i = 0; i < 5000; ++i) bytes.push_back(static_cast<char>((i * 131 + 7) % 256));
    std::ofstream(path, std::ios::binary) << bytes;
    // Source: GNU coreutils sha256sum, an implementation independent of OpenSSL.
    FILE* pipe = ::popen(("sha256sum '" + path + "'").c_str(), "r");
    REQUIRE(pipe);
    char line[128] = {};
    REQUIRE(std::fgets(line, sizeof line, pipe));
    ::pclose(pipe);
    CHECK(std::string(line).substr(0, 64) == sha256_hex(bytes));
}

TEST_CASE("canonical JSON sorts keys and drops whitespace", "[store]") {
    CHECK(canonical_json(R"({ "b": 1, "a": {"y": [1, 2.5, "x"], "x": null} })", "t") ==
          R"({"a":{"x":null,"y":[1,2.5,"x"]},"b":1})");
    // Value strings stay strings: "47k" is not turned into a number.
    CHECK(canonical_json(R"({"value": "47k", "n": 1e-14})", "t") == R"({"n":1e-14,"value":"47k"})");
}

TEST_CASE("the same design with keys in another order gets the same address", "[store]") {
    const std::string a = R"({"format":"ampbench-design/1","name":"HVE-PA1 preamp",
        "supply":{"node":"vcc","volts":"12","current_limit":"50m"},
        "parts":[{"ref":"R1","kind":"resistor","nodes":["vcc","b"],"value":"47k","tol":"5%"}]})";
    const std::string b = R"({
      "parts" : [ { "tol" : "5%", "value" : "47k", "nodes" : [ "vcc", "b" ], "kind" : "resistor",
                    "ref" : "R1" } ],
      "supply" : { "current_limit" : "50m", "volts" : "12", "node" : "vcc" },
      "name" : "HVE-PA1 preamp", "format" : "ampbench-design/1" })";
    CHECK(content_address(a, "a") == content_address(b, "b"));
    CHECK(content_address(a, "a") == sha256_hex(canonical_json(a, "a")));
    // Array order is meaning, not formatting: it changes the address.
    const std::string c = R"({"nodes":["b","vcc"]})";
    const std::string d = R"({"nodes":["vcc","b"]})";
    CHECK(content_address(c, "c") != content_address(d, "d"));
}

TEST_CASE("canonical JSON agrees with Python's sorted compact dump", "[store][reference]") {
    testing::TempDir dir;
    const std::string text =
        R"({"zeta":[3,1.5,-0.25,1e-14,100.0,12345678901234],"alpha":{"nested":{"b":true,"a":false}},)"
        R"("ümlaut":"µF Ω","quote":"a \"q\" \\ / \n\t","ctrl":"\u0001","empty":{},"list":[]})";
    const std::string path = dir.path("design.json");
    std::ofstream(path, std::ios::binary) << text;
    // Source: CPython json.dumps(sort_keys=True, separators=(",", ":"), ensure_ascii=False).
    const std::string command =
        "/usr/bin/python3 -c 'import json,sys; sys.stdout.write(json.dumps(json.load(open(sys.argv[1],"
        "encoding=\"utf-8\")), sort_keys=True, separators=(\",\",\":\"), ensure_ascii=False))' '" +
        path + "'";
    FILE* pipe = ::popen(command.c_str(), "r");
    REQUIRE(pipe);
    std::string python;
    char buffer[512];
    while (size_t n = std::fread(buffer, 1, sizeof buffer, pipe)) python.append(buffer, n);
    REQUIRE(::pclose(pipe) == 0);
    CHECK(canonical_json(text, path) == python);
}

TEST_CASE("canonical JSON of bad text names its origin", "[store]") {
    CHECK_THROWS_WITH(canonical_json("{\"a\": 1,", "board.design.json"),
                      Catch::Contains("board.design.json"));
}
