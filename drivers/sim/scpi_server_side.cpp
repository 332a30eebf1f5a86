// Header matching and parameter parsing for the simulated instruments.
#include "drivers/sim/scpi_server_side.h"

#include <cctype>
#include <charconv>
#include <cmath>

#include <fmt/format.h>

#include "core/errors.h"

namespace ampbench::sim {
namespace {

std::string_view trim(std::string_view s) {
    while (!s.empty() && std::isspace(static_cast<unsigned char>(s.front()))) s.remove_prefix(1);
    while (!s.empty() && std::isspace(static_cast<unsigned char>(s.back()))) s.remove_suffix(1);
    return s;
}

bool iequal(std::string_view a, std::string_view b) {
    if (a.size() != b.size()) return false;
    for (size_t i = 0; i < a.size(); ++i)
        if (std::toupper(static_cast<unsigned char>(a[i])) != std::toupper(static_cast<unsigned char>(b[i])))
            return false;
    return true;
}

// Splits at top-level `sep` outside quotes and parentheses.
std::vector<std::string> split_top(std::string_view s, char sep) {
    std::vector<std::string> out;
    int depth = 0;
    char quote = 0;
    size_t start = 0;
    for (size_t i = 0; i < s.size(); ++i) {
        const char c = s[i];
        if (quote) {
            if (c == quote) quote = 0;
        } else if (c == '"' || c == '\'') {
            quote = c;
        } else if (c == '(') {
            ++depth;
        } else if (c == ')') {
            --depth;
        } else if (c == sep && depth == 0) {
            out.emplace_back(trim(s.substr(start, i - start)));
            start = i + 1;
        }
    }
    out.emplace_back(trim(s.substr(start)));
    return out;
}

}  // namespace

bool mnemonic_is(std::string_view word, std::string_view mnemonic) {
    std::string short_form;
    for (char c : mnemonic)
        if (std::isupper(static_cast<unsigned char>(c)) || std::isdigit(static_cast<unsigned char>(c))) short_form += c;
    return iequal(word, mnemonic) || iequal(word, short_form);
}

std::vector<std::string> split_message(std::string_view line) { return split_top(line, ';'); }

std::optional<ScpiUnit> parse_unit(std::string_view text) {
    text = trim(text);
    if (text.empty()) return std::nullopt;
    ScpiUnit u;
    size_t end = 0;
    while (end < text.size() && !std::isspace(static_cast<unsigned char>(text[end]))) ++end;
    std::string_view header = text.substr(0, end);
    if (!header.empty() && header.back() == '?') {
        u.query = true;
        header.remove_suffix(1);
    }
    if (!header.empty() && header.front() == ':') header.remove_prefix(1);
    u.header = std::string(header);
    const std::string_view rest = trim(text.substr(end));
    if (!rest.empty()) u.params = split_top(rest, ',');
    return u;
}

bool header_matches(std::string_view header, std::string_view pattern, std::vector<int>* suffixes) {
    std::vector<int> found;
    while (true) {
        const size_t hc = header.find(':'), pc = pattern.find(':');
        if ((hc == std::string_view::npos) != (pc == std::string_view::npos)) return false;
        std::string_view hseg = header.substr(0, hc), pseg = pattern.substr(0, pc);
        const bool takes_suffix = !pseg.empty() && pseg.back() == '#';
        if (takes_suffix) pseg.remove_suffix(1);
        size_t digits = 0;
        while (digits < hseg.size() && std::isdigit(static_cast<unsigned char>(hseg[hseg.size() - 1 - digits]))) ++digits;
        int suffix = 1;
        if (digits > 0 && takes_suffix) {
            const std::string_view num = hseg.substr(hseg.size() - digits);
            std::from_chars(num.data(), num.data() + num.size(), suffix);
            hseg.remove_suffix(digits);
        }
        if (!mnemonic_is(hseg, pseg)) return false;
        if (takes_suffix) found.push_back(suffix);
        if (hc == std::string_view::npos) break;
        header.remove_prefix(hc + 1);
        pattern.remove_prefix(pc + 1);
    }
    if (suffixes) *suffixes = std::move(found);
    return true;
}

static const std::string& param_at(const ScpiUnit& u, size_t index) {
    if (index >= u.params.size() || u.params[index].empty()) throw ScpiFault{-109, "Missing parameter"};
    return u.params[index];
}

double number_param(const ScpiUnit& u, size_t index, double min_value, double max_value, double default_value) {
    const std::string& p = param_at(u, index);
    if (mnemonic_is(p, "MINimum")) return min_value;
    if (mnemonic_is(p, "MAXimum")) return max_value;
    if (mnemonic_is(p, "DEFault")) return default_value;
    if (mnemonic_is(p, "INFinity")) return INFINITY;
    double v = 0;
    const char* first = p.data();
    const char* last = p.data() + p.size();
    if (*first == '+') ++first;
    const auto [ptr, ec] = std::from_chars(first, last, v);
    if (ec != std::errc() || ptr != last || !std::isfinite(v)) throw ScpiFault{-104, "Data type error"};
    if (v < min_value || v > max_value) throw ScpiFault{-222, "Data out of range"};
    return v;
}

bool bool_param(const ScpiUnit& u, size_t index) {
    const std::string& p = param_at(u, index);
    if (mnemonic_is(p, "ON") || p == "1") return true;
    if (mnemonic_is(p, "OFF") || p == "0") return false;
    throw ScpiFault{-224, "Illegal parameter value"};
}

std::string word_param(const ScpiUnit& u, size_t index) { return param_at(u, index); }

std::vector<std::string> channel_list_param(const ScpiUnit& u, size_t index) {
    std::string_view p = trim(param_at(u, index));
    if (p.size() < 4 || p.substr(0, 2) != "(@" || p.back() != ')') throw ScpiFault{-224, "Illegal parameter value"};
    p = p.substr(2, p.size() - 3);
    std::vector<std::string> out;
    for (auto& ch : split_top(p, ',')) {
        if (ch.empty()) throw ScpiFault{-224, "Illegal parameter value"};
        out.push_back(ch);
    }
    return out;
}

std::string format_reply_number(double v) {
    if (std::isinf(v)) return "9.9E+37";
    if (std::isnan(v)) return "9.91E+37";
    return fmt::format("{:.12g}", v);
}

ScpiResponder::ScpiResponder(std::string identity) : identity_(std::move(identity)) {}

void ScpiResponder::on(std::string pattern, Handler command, Handler query) {
    entries_.push_back({std::move(pattern), std::move(command), std::move(query)});
}

void ScpiResponder::push_error(int code, std::string message) {
    // SCPI-1999 Vol. 2 §21.8.1: a full queue keeps its oldest entries and ends in −350.
    constexpr size_t kQueueSize = 32;
    if (errors_.size() + 1 >= kQueueSize) {
        if (errors_.size() < kQueueSize) errors_.push_back({-350, "Queue overflow"});
        return;
    }
    errors_.push_back({code, std::move(message)});
}

Outcome ScpiResponder::execute_unit(ScpiUnit u, double now_s) {
    Outcome out;
    out.busy_s = default_latency_s;
    if (!u.header.empty() && u.header.front() == '*') {
        if (iequal(u.header, "*IDN") && u.query) {
            out.reply = identity_;
            out.has_reply = true;
        } else if (iequal(u.header, "*OPC") && u.query) {
            out.reply = "1";
            out.has_reply = true;
            if (pending_until_s_ > now_s) out.busy_s += pending_until_s_ - now_s;
        } else if (iequal(u.header, "*CLS") && !u.query) {
            errors_.clear();
        } else if (iequal(u.header, "*RST") && !u.query) {
            if (reset_) reset_();
        } else if ((iequal(u.header, "*ESR") || iequal(u.header, "*STB") || iequal(u.header, "*TST")) && u.query) {
            out.reply = "0";
            out.has_reply = true;
        } else if ((iequal(u.header, "*WAI") || iequal(u.header, "*OPC")) && !u.query) {
            if (pending_until_s_ > now_s) out.busy_s += pending_until_s_ - now_s;
        } else {
            push_error(-113, "Undefined header");
        }
        return out;
    }
    if (u.query && header_matches(u.header, "SYSTem:ERRor", nullptr) ) {
        out.has_reply = true;
        if (errors_.empty()) {
            out.reply = "0,\"No error\"";
        } else {
            std::string message = errors_.front().message;
            for (char& c : message)
                if (c == '"') c = '\'';
            out.reply = fmt::format("{},\"{}\"", errors_.front().code, message);
            errors_.pop_front();
        }
        return out;
    }
    for (const Entry& e : entries_) {
        const Handler& h = u.query ? e.query : e.command;
        if (!h || !header_matches(u.header, e.pattern, &u.suffixes)) continue;
        try {
            Outcome r = h(u, now_s);
            if (r.busy_s <= 0) r.busy_s = default_latency_s;
            return r;
        } catch (const ScpiFault& f) {
            push_error(f.code, f.message);
            return out;
        } catch (const Error& err) {
            // The simulation itself failed (a step that did not converge): SCPI-1999 −300.
            push_error(-300, std::string("Device-specific error; ") + err.what());
            return out;
        }
    }
    push_error(-113, "Undefined header");
    return out;
}

Outcome ScpiResponder::execute_line(std::string_view line, double now_s) {
    Outcome total;
    bool first_reply = true;
    for (const std::string& text : split_message(line)) {
        auto unit = parse_unit(text);
        if (!unit) continue;
        Outcome r = execute_unit(std::move(*unit), now_s + total.busy_s);
        total.busy_s += r.busy_s;
        if (r.has_reply) {
            if (!first_reply) total.reply += ';';
            total.reply += r.reply;
            total.has_reply = true;
            first_reply = false;
        }
    }
    return total;
}

}  // namespace ampbench::sim
