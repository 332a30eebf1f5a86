// Profile reading through the shared JsonView, so every error names the file and the key.
#include "drivers/profiles/profile.h"

#include <cstdlib>
#include <algorithm>
#include <filesystem>
#include <fstream>
#include <sstream>
#include <set>

#include <fmt/format.h>
#include <nlohmann/json.hpp>

#include "core/errors.h"
#include "core/json_read.h"

#ifndef AMPBENCH_PROFILE_DIR
#define AMPBENCH_PROFILE_DIR ""
#endif

namespace ampbench::drivers {
namespace {

struct OperationRule {
    bool needs_value;  // send template must contain {value}
};

// Every operation a role knows; anything else in a profile is a typo.
const std::map<std::string, std::map<std::string, OperationRule>>& known_operations() {
    static const std::map<std::string, std::map<std::string, OperationRule>> ops{
        {"generator",
         {{"function_sine", {false}}, {"amplitude_unit", {false}}, {"frequency", {true}},
          {"amplitude_vpp", {true}}, {"offset", {true}}, {"load", {true}}, {"output", {true}}}},
        {"scope",
         {{"probe_ratio", {true}}, {"coupling", {true}}, {"bandwidth", {true}}, {"range_vpp", {true}},
          {"offset", {true}}, {"timebase", {true}}, {"points", {true}}, {"trigger_source", {false}},
          {"trigger_level", {true}}, {"trigger_slope", {false}}, {"single", {false}},
          {"data_format", {true}}, {"byte_order", {false}}, {"preamble", {false}},
          {"waveform_binary", {false}}, {"waveform_ascii", {false}}, {"amplitude_vpp", {false}}}},
        {"meter",
         {{"function_dc", {false}}, {"range", {true}}, {"range_auto", {false}}, {"route_close", {false}},
          {"read_dc", {false}}}},
        {"supply",
         {{"voltage", {true}}, {"current_limit", {true}}, {"output", {true}}, {"measure_current", {false}},
          {"measure_voltage", {false}}}},
    };
    return ops;
}

const std::set<std::string> kReplies{"number", "bool", "text", "preamble", "block_int16_be",
                                     "block_int16_le", "block_uint8", "ascii_list"};
const std::set<std::string> kPreambleFields{"points", "x_increment", "x_origin", "y_increment",
                                            "y_origin", "code_min", "code_max", "ignore"};

void check_template(const JsonView& op, const std::string& key, const std::string& tmpl) {
    size_t pos = 0;
    while ((pos = tmpl.find('{', pos)) != std::string::npos) {
        const auto close = tmpl.find('}', pos);
        if (close == std::string::npos) op.fail(key, fmt::format("unclosed '{{' in '{}'", tmpl));
        const std::string name = tmpl.substr(pos + 1, close - pos - 1);
        if (name != "value" && name != "ch")
            op.fail(key, fmt::format("unknown placeholder '{{{}}}' (use {{value}} or {{ch}})", name));
        pos = close + 1;
    }
    if (tmpl.find('}') != std::string::npos && tmpl.find('{') == std::string::npos)
        op.fail(key, fmt::format("stray '}}' in '{}'", tmpl));
    for (unsigned char c : tmpl)
        if (c < 0x20) op.fail(key, "control characters are not allowed in a command");
}

Operation read_operation(const JsonView& v, const std::string& role, const std::string& name,
                         const OperationRule& rule) {
    if (!v.is_object()) v.fail_here("an operation is an object with send/query/reply");
    v.reject_unknown_keys({"send", "query", "reply", "values", "fields", "expect", "note"});
    Operation op;
    op.role = role;
    op.name = name;
    op.send = v.string_or("send", "");
    op.query = v.string_or("query", "");
    op.reply = v.string_or("reply", "");
    op.expect = v.string_or("expect", "");
    if (op.send.empty() && op.query.empty()) v.fail_here("needs 'send' or 'query'");
    check_template(v, "send", op.send);
    check_template(v, "query", op.query);
    if (rule.needs_value && !op.send.empty() && op.send.find("{value}") == std::string::npos)
        v.fail("send", "this operation takes a setting: the template needs {value}");
    if (!op.query.empty() && op.reply.empty()) v.fail("reply", "a query needs a reply parser");
    if (!op.reply.empty() && !kReplies.count(op.reply))
        v.fail("reply", fmt::format("unknown reply parser '{}' (number, bool, text, preamble, block_int16_be, "
                                    "block_int16_le, block_uint8, ascii_list)", op.reply));
    if (auto values = v.find("values")) {
        if (!values->is_object()) v.fail("values", "must map setting names to tokens");
        for (const auto& key : values->keys()) op.values[key] = values->string(key);
    }
    if (auto fields = v.find("fields")) {
        for (const auto& f : fields->elements()) {
            const std::string field = f.as_string();
            if (!kPreambleFields.count(field))
                v.fail("fields", fmt::format("unknown preamble field '{}'", field));
            op.fields.push_back(field);
        }
    }
    if (op.reply == "preamble") {
        for (const char* needed : {"x_increment", "y_increment", "y_origin"})
            if (std::find(op.fields.begin(), op.fields.end(), needed) == op.fields.end())
                v.fail("fields", fmt::format("a preamble needs the field '{}'", needed));
    }
    return op;
}

}  // namespace

std::string Operation::token(const std::string& setting) const {
    const auto it = values.find(setting);
    return it == values.end() ? setting : it->second;
}

bool Profile::has(const std::string& role, const std::string& op) const {
    return operations.count(role + "." + op) != 0;
}

const Operation& Profile::require(const std::string& role, const std::string& op) const {
    const auto it = operations.find(role + "." + op);
    if (it == operations.end())
        throw InputError(path, role + "." + op, fmt::format("profile '{}' has no such operation", name));
    return it->second;
}

Profile parse_profile(const std::string& text, const std::string& origin) {
    const JsonDocument doc = JsonDocument::parse(text, origin);
    const JsonView root(doc);
    root.require_format("ampbench-profile/1");
    root.reject_unknown_keys({"format", "name", "description", "session", "generator", "scope", "meter", "supply"});
    Profile p;
    p.path = origin;
    p.name = root.string("name");
    if (auto s = root.find("session")) {
        s->reject_unknown_keys({"write_terminator", "timeout_ms", "max_block_bytes", "identify",
                                "operation_complete", "clear_status", "error_query", "max_errors",
                                "check_errors_after_send"});
        auto& o = p.session;
        o.write_terminator = s->string_or("write_terminator", o.write_terminator);
        if (o.write_terminator != "\n" && o.write_terminator != "\r\n")
            s->fail("write_terminator", "must be \"\\n\" or \"\\r\\n\"");
        const double timeout_ms = s->number_or("timeout_ms", o.timeout_s * 1000.0);
        if (!(timeout_ms >= 1.0 && timeout_ms <= 600000.0)) s->fail("timeout_ms", "must be 1..600000");
        o.timeout_s = timeout_ms / 1000.0;
        const double max_block = s->number_or("max_block_bytes", static_cast<double>(o.max_block_bytes));
        if (!(max_block >= 1.0 && max_block <= 1e9)) s->fail("max_block_bytes", "must be 1..1e9");
        o.max_block_bytes = static_cast<size_t>(max_block);
        o.identify = s->string_or("identify", o.identify);
        o.operation_complete = s->string_or("operation_complete", o.operation_complete);
        o.clear_status = s->string_or("clear_status", o.clear_status);
        o.error_query = s->string_or("error_query", o.error_query);
        const double max_errors = s->number_or("max_errors", o.max_errors);
        if (!(max_errors >= 1 && max_errors <= 1000)) s->fail("max_errors", "must be 1..1000");
        o.max_errors = static_cast<int>(max_errors);
        p.check_errors_after_send = s->boolean_or("check_errors_after_send", true);
    }
    for (const auto& [role, ops] : known_operations()) {
        auto section = root.find(role);
        if (!section) continue;
        if (!section->is_object()) section->fail_here("must be an object of operations");
        for (const auto& key : section->keys()) {
            const auto rule = ops.find(key);
            if (rule == ops.end()) section->fail(key, fmt::format("unknown {} operation", role));
            p.operations[role + "." + key] = read_operation(section->at(key), role, key, rule->second);
        }
    }
    return p;
}

Profile load_profile_file(const std::string& path) {
    std::ifstream in(path, std::ios::binary);
    if (!in) throw InputError(path, "", "cannot read the profile file");
    std::ostringstream text;
    text << in.rdbuf();
    return parse_profile(text.str(), path);
}

std::vector<std::string> profile_search_dirs(const std::vector<std::string>& extra_dirs) {
    std::vector<std::string> dirs;
    if (const char* env = std::getenv("AMPBENCH_PROFILE_PATH"); env && *env) {
        std::string_view s(env);
        while (!s.empty()) {
            const auto colon = s.find(':');
            if (colon != 0) dirs.emplace_back(s.substr(0, colon));
            if (colon == std::string_view::npos) break;
            s.remove_prefix(colon + 1);
        }
    }
    dirs.insert(dirs.end(), extra_dirs.begin(), extra_dirs.end());
    if (*AMPBENCH_PROFILE_DIR) dirs.emplace_back(AMPBENCH_PROFILE_DIR);
    return dirs;
}

Profile find_profile(const std::string& name_or_path, const std::vector<std::string>& extra_dirs,
                     const std::string& bench_file, const std::string& field) {
    namespace fs = std::filesystem;
    const bool is_path = name_or_path.find('/') != std::string::npos ||
                         (name_or_path.size() > 5 && name_or_path.ends_with(".json"));
    if (is_path) {
        fs::path p(name_or_path);
        if (p.is_relative() && !bench_file.empty()) p = fs::path(bench_file).parent_path() / p;
        if (!fs::exists(p)) throw InputError(bench_file, field, fmt::format("profile file '{}' not found", p.string()));
        return load_profile_file(p.string());
    }
    for (const auto& dir : profile_search_dirs(extra_dirs)) {
        const fs::path p = fs::path(dir) / (name_or_path + ".json");
        std::error_code ec;
        if (fs::exists(p, ec)) return load_profile_file(p.string());
    }
    throw InputError(bench_file, field, fmt::format("no profile named '{}' (searched $AMPBENCH_PROFILE_PATH "
                                                    "and the shipped profiles)", name_or_path));
}

std::string expand_template(const std::string& tmpl, const std::string& value, const std::string& channel) {
    std::string out;
    out.reserve(tmpl.size() + value.size());
    for (size_t i = 0; i < tmpl.size();) {
        if (tmpl.compare(i, 7, "{value}") == 0) {
            out += value;
            i += 7;
        } else if (tmpl.compare(i, 4, "{ch}") == 0) {
            out += channel;
            i += 4;
        } else {
            out += tmpl[i++];
        }
    }
    return out;
}

std::string format_number(double value) { return fmt::format("{:.12g}", value); }

}  // namespace ampbench::drivers
