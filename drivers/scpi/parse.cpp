// Strict scanners for SCPI replies; anything unexpected is "not parsed", never a guess.
#include "drivers/scpi/parse.h"

#include <cctype>
#include <charconv>
#include <cmath>
#include <limits>

namespace ampbench::drivers {
namespace {

bool is_digit(char c) { return c >= '0' && c <= '9'; }

char upper(char c) { return static_cast<char>(std::toupper(static_cast<unsigned char>(c))); }

bool iequals(std::string_view a, std::string_view b) {
    if (a.size() != b.size()) return false;
    for (size_t i = 0; i < a.size(); ++i)
        if (upper(a[i]) != upper(b[i])) return false;
    return true;
}

std::string_view trim_spaces(std::string_view s) {
    while (!s.empty() && (s.front() == ' ' || s.front() == '\t')) s.remove_prefix(1);
    while (!s.empty() && (s.back() == ' ' || s.back() == '\t')) s.remove_suffix(1);
    return s;
}

std::string_view strip_quotes(std::string_view s) {
    if (s.size() >= 2 && ((s.front() == '"' && s.back() == '"') || (s.front() == '\'' && s.back() == '\'')))
        return s.substr(1, s.size() - 2);
    return s;
}

}  // namespace

std::string_view trim_reply(std::string_view reply) {
    if (!reply.empty() && reply.back() == '\n') reply.remove_suffix(1);
    if (!reply.empty() && reply.back() == '\r') reply.remove_suffix(1);
    return trim_spaces(reply);
}

std::optional<Identity> parse_identity(std::string_view reply) {
    reply = trim_reply(reply);
    std::string_view fields[4];
    size_t count = 0;
    size_t start = 0;
    for (size_t i = 0; i <= reply.size(); ++i) {
        if (i == reply.size() || reply[i] == ',') {
            if (count == 4) return std::nullopt;
            fields[count++] = trim_spaces(reply.substr(start, i - start));
            start = i + 1;
        } else if (static_cast<unsigned char>(reply[i]) < 0x20 || static_cast<unsigned char>(reply[i]) == 0x7f) {
            return std::nullopt;
        }
    }
    if (count != 4 || fields[0].empty() || fields[1].empty()) return std::nullopt;
    return Identity{std::string(fields[0]), std::string(fields[1]), std::string(fields[2]), std::string(fields[3])};
}

std::optional<double> parse_scpi_number(std::string_view reply) {
    std::string_view s = trim_reply(reply);
    if (iequals(s, "INF") || iequals(s, "+INF")) return std::numeric_limits<double>::infinity();
    if (iequals(s, "NINF") || iequals(s, "-INF")) return -std::numeric_limits<double>::infinity();
    if (iequals(s, "NAN")) return std::numeric_limits<double>::quiet_NaN();
    size_t pos = 0;
    if (pos < s.size() && (s[pos] == '+' || s[pos] == '-')) ++pos;
    size_t digits = 0;
    while (pos < s.size() && is_digit(s[pos])) ++pos, ++digits;
    if (pos < s.size() && s[pos] == '.') {
        ++pos;
        while (pos < s.size() && is_digit(s[pos])) ++pos, ++digits;
    }
    if (digits == 0) return std::nullopt;
    if (pos < s.size() && (s[pos] == 'e' || s[pos] == 'E')) {
        ++pos;
        if (pos < s.size() && (s[pos] == '+' || s[pos] == '-')) ++pos;
        size_t exp_digits = 0;
        while (pos < s.size() && is_digit(s[pos])) ++pos, ++exp_digits;
        if (exp_digits == 0) return std::nullopt;
    }
    if (pos != s.size()) return std::nullopt;
    std::string_view body = s;
    if (!body.empty() && body.front() == '+') body.remove_prefix(1);  // from_chars takes no '+'
    double value = 0.0;
    const auto [end, ec] = std::from_chars(body.data(), body.data() + body.size(), value);
    if (end != body.data() + body.size()) return std::nullopt;
    if (ec == std::errc::result_out_of_range) {
        value = (!body.empty() && body.front() == '-') ? -std::numeric_limits<double>::infinity()
                                                       : std::numeric_limits<double>::infinity();
        // A huge exponent is an overflow; a tiny one underflows to zero.
        const auto e = body.find_first_of("eE");
        if (e != std::string_view::npos && e + 1 < body.size() && body[e + 1] == '-') value = 0.0;
    } else if (ec != std::errc()) {
        return std::nullopt;
    }
    // SCPI-1999 Vol. 1 §7.2.1: 9.9E37 stands for +infinity, -9.9E37 for -infinity, 9.91E37 for NaN.
    if (value == 9.91e37) return std::numeric_limits<double>::quiet_NaN();
    if (value == 9.9e37) return std::numeric_limits<double>::infinity();
    if (value == -9.9e37) return -std::numeric_limits<double>::infinity();
    return value;
}

std::optional<bool> parse_scpi_bool(std::string_view reply) {
    const std::string_view s = trim_reply(reply);
    if (s == "1" || s == "+1" || iequals(s, "ON")) return true;
    if (s == "0" || s == "+0" || iequals(s, "OFF")) return false;
    return std::nullopt;
}

std::optional<std::vector<double>> parse_number_list(std::string_view reply) {
    std::string_view s = trim_reply(reply);
    std::vector<double> values;
    if (s.empty()) return values;
    size_t start = 0;
    for (size_t i = 0; i <= s.size(); ++i) {
        if (i == s.size() || s[i] == ',') {
            const auto v = parse_scpi_number(s.substr(start, i - start));
            if (!v) return std::nullopt;
            values.push_back(*v);
            start = i + 1;
        }
    }
    return values;
}

std::optional<ScpiError> parse_error_entry(std::string_view reply) {
    const std::string_view s = trim_reply(reply);
    const auto comma = s.find(',');
    if (comma == std::string_view::npos) return std::nullopt;
    const std::string_view code_text = trim_spaces(s.substr(0, comma));
    const auto code = parse_scpi_number(code_text);
    if (!code || !std::isfinite(*code) || *code != std::floor(*code) || std::fabs(*code) > 1e9) return std::nullopt;
    if (code_text.find_first_of(".eE") != std::string_view::npos) return std::nullopt;
    return ScpiError{static_cast<int>(*code), std::string(strip_quotes(trim_spaces(s.substr(comma + 1))))};
}

std::string scpi_error_class(int code) {
    if (code == 0) return "no error";
    if (code > 0) return "instrument-specific error";
    if (code <= -100 && code > -200) return "command error";
    if (code <= -200 && code > -300) return "execution error";
    if (code <= -300 && code > -400) return "device-specific error";
    if (code <= -400 && code > -500) return "query error";
    if (code <= -500 && code > -600) return "power-on event";
    if (code <= -600 && code > -700) return "user request event";
    if (code <= -700 && code > -800) return "request control event";
    if (code <= -800 && code > -900) return "operation complete event";
    return "error";
}

bool scpi_token_matches(std::string_view reply, std::string_view token) {
    const std::string_view r = strip_quotes(trim_reply(reply));
    const std::string_view t = strip_quotes(token);
    if (iequals(r, t)) return true;
    std::string short_form;
    for (char c : t)
        if (std::isupper(static_cast<unsigned char>(c)) || is_digit(c) || c == ',') short_form += c;
    return !short_form.empty() && iequals(r, short_form);
}

}  // namespace ampbench::drivers
