// One reader for every ampbench JSON file: numeric fields may be numbers or value strings
// (DESIGN.md §4), and every error names the file and the key path.
#pragma once

#include <memory>
#include <optional>
#include <string>
#include <string_view>
#include <vector>

#include <nlohmann/json_fwd.hpp>

namespace ampbench {

// A parsed JSON document that remembers where it came from.
class JsonDocument {
public:
    // Reads and parses a file; InputError naming the file (and line/column) on failure.
    static JsonDocument load(const std::string& path);
    // Parses text; `origin` is used in error messages in place of a file name.
    static JsonDocument parse(std::string_view text, const std::string& origin);

    JsonDocument(JsonDocument&&) noexcept;
    JsonDocument& operator=(JsonDocument&&) noexcept;
    ~JsonDocument();

    const nlohmann::json& root() const { return *root_; }
    const std::string& origin() const { return origin_; }

private:
    JsonDocument(std::unique_ptr<nlohmann::json> root, std::string origin);
    std::unique_ptr<nlohmann::json> root_;
    std::string origin_;
};

// A read-only view of one JSON node with its file and key path, for precise errors.
class JsonView {
public:
    JsonView(const nlohmann::json& node, std::string file, std::string path = {});
    explicit JsonView(const JsonDocument& doc);

    const nlohmann::json& node() const { return *node_; }
    const std::string& file() const { return file_; }
    // Dotted key path of this node ("scope.channels.1"); empty for the root.
    const std::string& path() const { return path_; }
    // Key path of a child, for error messages.
    std::string key_path(std::string_view key) const;

    bool is_object() const;
    bool is_array() const;
    bool is_null() const;
    bool has(std::string_view key) const;
    std::vector<std::string> keys() const;
    size_t size() const;

    JsonView at(std::string_view key) const;            // InputError when missing
    std::optional<JsonView> find(std::string_view key) const;
    JsonView at(size_t index) const;                     // arrays
    std::vector<JsonView> elements() const;              // arrays; InputError if not an array

    // Numeric field: a JSON number or a value string of §4.1.
    double number(std::string_view key) const;
    double number_or(std::string_view key, double fallback) const;
    std::optional<double> optional_number(std::string_view key) const;
    // This node as a number (for array elements).
    double as_number() const;
    // Tolerance field: "5%" or a JSON number taken as a fraction.
    double tolerance_or(std::string_view key, double fallback) const;

    std::string string(std::string_view key) const;
    std::string string_or(std::string_view key, std::string fallback) const;
    std::string as_string() const;
    bool boolean_or(std::string_view key, bool fallback) const;

    // Checks the "format" tag: `expected` like "ampbench-design/1". A newer version of the same
    // format, or another format, is an InputError naming the file.
    void require_format(std::string_view expected) const;

    // Throws InputError naming this node's file and the child key.
    [[noreturn]] void fail(std::string_view key, const std::string& text) const;
    [[noreturn]] void fail_here(const std::string& text) const;

    // Errors for keys outside `allowed` (catches typos in hand-written files).
    void reject_unknown_keys(const std::vector<std::string_view>& allowed) const;

private:
    const nlohmann::json* node_;
    std::string file_;
    std::string path_;
};

}  // namespace ampbench
