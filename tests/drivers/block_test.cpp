// IEEE 488.2 arbitrary block data: header parsing, encoding and decoding.
#include <stdexcept>
#include <string>

#include <catch2/catch.hpp>

#include "drivers/scpi/block.h"

using namespace ampbench::drivers;

TEST_CASE("definite blocks round-trip at 0, 1 and 10 MB bytes", "[block]") {
    // Source: IEEE 488.2-1992 §7.7.6.2, <DEFINITE LENGTH ARBITRARY BLOCK RESPONSE DATA>:
    // '#', one non-zero digit n, n digits of length, then the data bytes.
    for (size_t size : {size_t{0}, size_t{1}, size_t{10} << 20}) {
        std::string data(size, '\0');
        for (size_t i = 0; i < size; ++i) data[i] = static_cast<char>((i * 131 + 7) & 0xff);
        const std::string block = encode_block(data);
        CHECK(decode_block(block) == data);
        CHECK(decode_block(block + "\n") == data);
        CHECK(decode_block(block + "\r\n") == data);
    }
    CHECK(encode_block("") == "#10");
    CHECK(encode_block("A") == "#11A");
    CHECK(encode_block(std::string(10 << 20, 'x')).substr(0, 10) == "#810485760");
}

TEST_CASE("a nine-digit length is read exactly, leading zeros allowed", "[block]") {
    // Source: IEEE 488.2-1992 §7.7.6.2: the length field has exactly n digits (leading zeros allowed).
    CHECK(decode_block("#9000000005hello\n") == "hello");
    const auto h = parse_block_header("#9123456789", 1000000000);
    REQUIRE(h);
    CHECK(h->length == 123456789u);
    CHECK(h->header_bytes == 11u);
    CHECK_FALSE(h->indefinite);
}

TEST_CASE("a header above the size cap is refused before any data", "[block]") {
    CHECK_THROWS_WITH(parse_block_header("#9999999999"), Catch::Contains("above the limit"));
    CHECK_THROWS_AS(decode_block("#9999999999xyz"), std::invalid_argument);
    CHECK(parse_block_header("#5123") == std::nullopt);  // needs more bytes
    CHECK(parse_block_header("#") == std::nullopt);
}

TEST_CASE("malformed blocks are errors", "[block]") {
    CHECK_THROWS_AS(decode_block("12"), std::invalid_argument);
    CHECK_THROWS_AS(decode_block("#A12"), std::invalid_argument);
    CHECK_THROWS_AS(decode_block("#21x1234567890"), std::invalid_argument);
    CHECK_THROWS_WITH(decode_block("#15abc"), Catch::Contains("announces 5 bytes but has 3"));
    CHECK_THROWS_AS(decode_block("#13abcXYZ"), std::invalid_argument);
}

TEST_CASE("indefinite blocks run to the final newline", "[block]") {
    // Source: IEEE 488.2-1992 §7.7.6.3 (indefinite length: "#0", data, terminated by NL^END).
    CHECK(decode_block("#0abc\n") == "abc");
    CHECK(decode_block("#0\n").empty());
    CHECK_THROWS_AS(decode_block("#0abc"), std::invalid_argument);
    const auto h = parse_block_header("#0");
    REQUIRE(h);
    CHECK(h->indefinite);
}
