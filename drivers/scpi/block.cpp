// Block header scanning without allocation, so a lying header costs nothing.
#include "drivers/scpi/block.h"

#include <stdexcept>

#include <fmt/format.h>

namespace ampbench::drivers {

std::optional<BlockHeader> parse_block_header(std::string_view text, size_t max_bytes) {
    if (text.empty()) return std::nullopt;
    if (text[0] != '#') throw std::invalid_argument("a block must start with '#'");
    if (text.size() < 2) return std::nullopt;
    const char n = text[1];
    if (n < '0' || n > '9') throw std::invalid_argument(fmt::format("block digit count '{}' is not 0..9", n));
    BlockHeader h;
    if (n == '0') {
        h.indefinite = true;
        h.header_bytes = 2;
        return h;
    }
    const size_t digits = static_cast<size_t>(n - '0');
    if (text.size() < 2 + digits) return std::nullopt;
    unsigned long long length = 0;  // 9 digits never overflow 64 bits
    for (size_t i = 0; i < digits; ++i) {
        const char c = text[2 + i];
        if (c < '0' || c > '9') throw std::invalid_argument("block length has a non-digit");
        length = length * 10 + static_cast<unsigned long long>(c - '0');
    }
    if (length > max_bytes)
        throw std::invalid_argument(fmt::format("block of {} bytes is above the limit of {} bytes", length, max_bytes));
    h.header_bytes = 2 + digits;
    h.length = static_cast<size_t>(length);
    return h;
}

std::string encode_block(std::string_view data) {
    const std::string len = std::to_string(data.size());
    if (len.size() > 9) throw std::invalid_argument("a block holds at most 999999999 bytes");
    std::string out = "#" + std::to_string(len.size()) + len;
    out.append(data);
    return out;
}

std::string decode_block(std::string_view text, size_t max_bytes) {
    const auto header = parse_block_header(text, max_bytes);
    if (!header) throw std::invalid_argument("block header is cut short");
    std::string_view rest = text.substr(header->header_bytes);
    if (header->indefinite) {
        if (rest.empty() || rest.back() != '\n') throw std::invalid_argument("indefinite block without a final newline");
        rest.remove_suffix(1);
        if (rest.size() > max_bytes) throw std::invalid_argument("indefinite block above the size limit");
        return std::string(rest);
    }
    if (rest.size() < header->length) throw std::invalid_argument(
        fmt::format("block announces {} bytes but has {}", header->length, rest.size()));
    const std::string_view tail = rest.substr(header->length);
    if (!tail.empty() && tail != "\n" && tail != "\r\n")
        throw std::invalid_argument("unexpected bytes after the block");
    return std::string(rest.substr(0, header->length));
}

}  // namespace ampbench::drivers
