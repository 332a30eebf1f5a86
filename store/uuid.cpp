// Version 4 UUIDs from OpenSSL's cryptographic random generator.
#include "store/uuid.h"

#include <array>

#include <openssl/rand.h>

#include "core/errors.h"

namespace ampbench::store {

std::string make_uuid_v4() {
    std::array<unsigned char, 16> bytes{};
    if (RAND_bytes(bytes.data(), static_cast<int>(bytes.size())) != 1)
        throw StoreError("cannot draw random bytes for a UUID");
    // RFC 4122 §4.4: version 4 in the high nibble of byte 6, variant 10xx in byte 8.
    bytes[6] = static_cast<unsigned char>((bytes[6] & 0x0f) | 0x40);
    bytes[8] = static_cast<unsigned char>((bytes[8] & 0x3f) | 0x80);
    static constexpr char hex[] = "0123456789abcdef";
    std::string out;
    out.reserve(36);
    for (size_t i = 0; i < bytes.size(); ++i) {
        if (i == 4 || i == 6 || i == 8 || i == 10) out.push_back('-');
        out.push_back(hex[bytes[i] >> 4]);
        out.push_back(hex[bytes[i] & 0x0f]);
    }
    return out;
}

}  // namespace ampbench::store
