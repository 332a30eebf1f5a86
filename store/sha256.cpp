// SHA-256 through OpenSSL's EVP interface, one checked call at a time.
#include "store/sha256.h"

#include <array>
#include <memory>

#include <openssl/evp.h>

#include "core/errors.h"

namespace ampbench::store {

namespace {

struct DigestContextDeleter {
    void operator()(EVP_MD_CTX* ctx) const { EVP_MD_CTX_free(ctx); }
};

void check(int ok, const char* what) {
    if (ok != 1) throw StoreError(std::string("SHA-256: ") + what + " failed");
}

}  // namespace

std::string sha256_hex(std::string_view bytes) {
    std::unique_ptr<EVP_MD_CTX, DigestContextDeleter> ctx(EVP_MD_CTX_new());
    if (!ctx) throw StoreError("SHA-256: out of memory");
    check(EVP_DigestInit_ex(ctx.get(), EVP_sha256(), nullptr), "init");
    check(EVP_DigestUpdate(ctx.get(), bytes.data(), bytes.size()), "update");
    std::array<unsigned char, EVP_MAX_MD_SIZE> digest{};
    unsigned int length = 0;
    check(EVP_DigestFinal_ex(ctx.get(), digest.data(), &length), "final");

    static constexpr char hex[] = "0123456789abcdef";
    std::string out;
    out.reserve(2 * length);
    for (unsigned int i = 0; i < length; ++i) {
        out.push_back(hex[digest[i] >> 4]);
        out.push_back(hex[digest[i] & 0x0f]);
    }
    return out;
}

}  // namespace ampbench::store
