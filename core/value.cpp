// A strict hand-written scanner for the value syntax, so every malformed text is an error.
#include "core/value.h"

#include <algorithm>
#include <array>
#include <cmath>
#include <cstdlib>
#include <optional>

#include <fmt/format.h>

#include "core/errors.h"

namespace ampbench {
namespace {

struct Prefix {
    std::string_view text;
    double scale;
};

// SI prefixes accepted by §4.1; µ may come as MICRO SIGN (U+00B5) or GREEK SMALL MU (U+03BC).
constexpr std::array<Prefix, 9> kPrefixes{{{"p", 1e-12},
                                           {"n", 1e-9},
                                           {"u", 1e-6},
                                           {"\xC2\xB5", 1e-6},
                                           {"\xCE\xBC", 1e-6},
                                           {"m", 1e-3},
                                           {"k", 1e3},
                                           {"M", 1e6},
                                           {"G", 1e9}}};

// Units that may follow a value; they do not change it.
constexpr std::array<std::string_view, 11> kUnits{
    "\xCE\xA9", "\xE2\x84\xA6", "ohms", "ohm", "Hz", "F", "V", "A", "H", "s", "W"};

[[noreturn]] void fail(std::string_view field, std::string_view text, std::string_view why) {
    throw InputError("", std::string(field),
                     fmt::format("'{}' is not a value ({})", text, why));
}

bool is_digit(char c) { return c >= '0' && c <= '9'; }

std::optional<Prefix> prefix_at(std::string_view s, size_t pos) {
    for (const auto& p : kPrefixes)
        if (s.substr(pos, p.text.size()) == p.text) return p;
    return std::nullopt;
}

bool is_unit(std::string_view rest) {
    for (auto u : kUnits)
        if (rest == u) return true;
    return false;
}

size_t scan_digits(std::string_view s, size_t pos) {
    while (pos < s.size() && is_digit(s[pos])) ++pos;
    return pos;
}

}  // namespace

double parse_value(std::string_view text, std::string_view field) {
    std::string_view s = text;
    while (!s.empty() && (s.front() == ' ' || s.front() == '\t')) s.remove_prefix(1);
    while (!s.empty() && (s.back() == ' ' || s.back() == '\t')) s.remove_suffix(1);
    if (s.empty()) fail(field, text, "empty");

    size_t pos = 0;
    bool negative = false;
    if (s[pos] == '+' || s[pos] == '-') {
        negative = s[pos] == '-';
        ++pos;
    }
    const size_t int_start = pos;
    pos = scan_digits(s, pos);
    const std::string_view int_part = s.substr(int_start, pos - int_start);

    std::string mantissa(int_part);
    double scale = 1.0;
    bool have_prefix = false;
    bool have_exponent = false;

    if (pos < s.size() && s[pos] == '.') {
        ++pos;
        const size_t frac_start = pos;
        pos = scan_digits(s, pos);
        if (int_part.empty() && pos == frac_start) fail(field, text, "no digits");
        mantissa += "." + std::string(s.substr(frac_start, pos - frac_start));
        // Exponent: e/E followed by an optional sign and digits.
    } else if (int_part.empty()) {
        // IEC 60062 allows a leading letter ("R47"); nothing else may start without a digit.
        if (!(pos < s.size() && s[pos] == 'R')) fail(field, text, "no digits");
    }

    if (pos < s.size() && (s[pos] == 'e' || s[pos] == 'E')) {
        size_t p = pos + 1;
        if (p < s.size() && (s[p] == '+' || s[p] == '-')) ++p;
        const size_t exp_digits = scan_digits(s, p);
        if (exp_digits == p) fail(field, text, "exponent without digits");
        mantissa += std::string(s.substr(pos, exp_digits - pos));
        pos = exp_digits;
        have_exponent = true;
    } else if (pos < s.size() && mantissa.find('.') == std::string::npos) {
        // IEC 60062 letter code: digits, a letter in place of the decimal point, digits.
        std::optional<Prefix> letter;
        size_t letter_len = 0;
        if (s[pos] == 'R') {
            letter = Prefix{"R", 1.0};
            letter_len = 1;
        } else if (auto p = prefix_at(s, pos)) {
            letter = p;
            letter_len = p->text.size();
        }
        if (letter && pos + letter_len < s.size() && is_digit(s[pos + letter_len])) {
            const size_t frac_start = pos + letter_len;
            const size_t frac_end = scan_digits(s, frac_start);
            mantissa = (int_part.empty() ? std::string("0") : std::string(int_part)) + "." +
                       std::string(s.substr(frac_start, frac_end - frac_start));
            scale = letter->scale;
            have_prefix = true;
            pos = frac_end;
        } else if (letter && s[pos] == 'R') {
            // "2R" is 2 ohms written with the letter code.
            if (int_part.empty()) fail(field, text, "no digits");
            have_prefix = true;
            pos += 1;
        }
    }

    if (!have_prefix && !have_exponent && pos < s.size()) {
        if (auto p = prefix_at(s, pos)) {
            // A prefix letter that is also a unit ("m" never is; "F" is not a prefix) is taken as
            // prefix only when what follows is empty or a unit.
            const std::string_view rest = s.substr(pos + p->text.size());
            if (rest.empty() || is_unit(rest)) {
                scale = p->scale;
                pos += p->text.size();
            }
        }
    }
    const std::string_view rest = s.substr(pos);
    if (!rest.empty() && !is_unit(rest)) fail(field, text, fmt::format("unexpected '{}'", rest));

    char* end = nullptr;
    const double mag = std::strtod(mantissa.c_str(), &end);
    if (end != mantissa.c_str() + mantissa.size() || mantissa.empty())
        fail(field, text, "malformed number");
    const double value = (negative ? -mag : mag) * scale;
    if (!std::isfinite(value)) fail(field, text, "out of range");
    return value;
}

double parse_tolerance(std::string_view text, std::string_view field) {
    std::string_view s = text;
    while (!s.empty() && s.back() == ' ') s.remove_suffix(1);
    if (s.empty() || s.back() != '%')
        throw InputError("", std::string(field),
                         fmt::format("'{}' is not a tolerance (write it as '5%')", text));
    s.remove_suffix(1);
    double pct = 0;
    try {
        pct = parse_value(s, field);
    } catch (const InputError&) {
        throw InputError("", std::string(field), fmt::format("'{}' is not a tolerance", text));
    }
    if (pct < 0 || pct >= 100)
        throw InputError("", std::string(field),
                         fmt::format("tolerance '{}' must be between 0% and 100%", text));
    return pct / 100.0;
}

std::string format_eng(double value, std::string_view unit, int digits) {
    if (!std::isfinite(value)) return fmt::format("{}{}", value, unit);
    if (value == 0) return fmt::format("0{}", unit);
    static constexpr std::array<std::string_view, 9> names{"p", "n", "u", "m", "",
                                                           "k", "M", "G", "T"};
    const double mag = std::fabs(value);
    int exp3 = static_cast<int>(std::floor(std::log10(mag) / 3.0));
    exp3 = std::clamp(exp3, -4, 4);
    double scaled = value / std::pow(10.0, 3 * exp3);
    // Rounding can carry into the next group (999.95k -> 1000k): move up a prefix then.
    std::string body = fmt::format("{:.{}g}", scaled, digits);
    if (std::fabs(std::strtod(body.c_str(), nullptr)) >= 1000.0 && exp3 < 4) {
        ++exp3;
        scaled = value / std::pow(10.0, 3 * exp3);
        body = fmt::format("{:.{}g}", scaled, digits);
    }
    return fmt::format("{}{}{}", body, names[static_cast<size_t>(exp3 + 4)], unit);
}

}  // namespace ampbench
