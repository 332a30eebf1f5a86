// Instrument profiles `ampbench-profile/1`: JSON files mapping each abstract operation of a role
// to command templates and a reply parser, so a new instrument needs no recompiling.
#pragma once

#include <map>
#include <string>
#include <vector>

#include "drivers/scpi/session.h"

namespace ampbench::drivers {

struct Operation {
    std::string role, name;  // "scope", "preamble"
    std::string send;        // template with {value} and {ch}; empty if none
    std::string query;       // template; empty if none
    std::string reply;       // parser name: number, bool, text, preamble, block_int16_be, ascii_list
    std::string expect;      // text an answer must match (SCPI long/short form)
    std::map<std::string, std::string> values;  // setting name -> token ("high-z" -> "INFinity")
    std::vector<std::string> fields;            // preamble field order

    // The token for a named setting, or the name itself.
    std::string token(const std::string& setting) const;
};

struct Profile {
    std::string name;
    std::string path;  // file it came from ("(built-in)" never: profiles are always files)
    SessionOptions session;
    bool check_errors_after_send = true;
    std::map<std::string, Operation> operations;  // key "role.name"

    bool has(const std::string& role, const std::string& op) const;
    // InputError naming the profile file and key when the operation is missing.
    const Operation& require(const std::string& role, const std::string& op) const;
};

// Parses and validates profile text; InputError naming `origin` and the key for any mistake
// (unknown role or operation, a reply parser that does not exist, an unknown placeholder).
Profile parse_profile(const std::string& text, const std::string& origin);
Profile load_profile_file(const std::string& path);

// Directories searched for `<name>.json`, in order: each entry of $AMPBENCH_PROFILE_PATH
// (colon-separated), `extra_dirs`, then the profiles shipped with ampbench.
std::vector<std::string> profile_search_dirs(const std::vector<std::string>& extra_dirs = {});
// A name ("scpi-generic") is looked up in profile_search_dirs; a value with '/' or ending in
// ".json" is a path. InputError naming `field` when not found.
Profile find_profile(const std::string& name_or_path, const std::vector<std::string>& extra_dirs,
                     const std::string& bench_file, const std::string& field);

// Fills a template: {value} and {ch}.
std::string expand_template(const std::string& tmpl, const std::string& value, const std::string& channel);
// Numbers for commands: shortest of %.12g.
std::string format_number(double value);

}  // namespace ampbench::drivers
