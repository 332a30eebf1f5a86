// JsonDocument and JsonView: nlohmann::json behind a small interface that knows file and key.
#include "core/json_read.h"

#include <cstdlib>
#include <fstream>
#include <sstream>

#include <fmt/format.h>
#include <nlohmann/json.hpp>

#include "core/errors.h"
#include "core/value.h"

namespace ampbench {

JsonDocument::JsonDocument(std::unique_ptr<nlohmann::json> root, std::string origin)
    : root_(std::move(root)), origin_(std::move(origin)) {}
JsonDocument::JsonDocument(JsonDocument&&) noexcept = default;
JsonDocument& JsonDocument::operator=(JsonDocument&&) noexcept = default;
JsonDocument::~JsonDocument() = default;

JsonDocument JsonDocument::load(const std::string& path) {
    std::ifstream in(path, std::ios::binary);
    if (!in) throw InputError(path, "", "cannot open file");
    std::ostringstream text;
    text << in.rdbuf();
    if (in.bad()) throw InputError(path, "", "cannot read file");
    return parse(text.str(), path);
}

JsonDocument JsonDocument::parse(std::string_view text, const std::string& origin) {
    try {
        auto root = std::make_unique<nlohmann::json>(nlohmann::json::parse(text));
        return JsonDocument(std::move(root), origin);
    } catch (const nlohmann::json::parse_error& e) {
        // Turn the byte offset into a line and column a user can find.
        size_t line = 1, col = 1;
        for (size_t i = 0; i < e.byte && i < text.size(); ++i) {
            if (text[i] == '\n') {
                ++line;
                col = 1;
            } else {
                ++col;
            }
        }
        throw InputError(origin, "",
                         fmt::format("not valid JSON at line {}, column {}", line, col));
    }
}

JsonView::JsonView(const nlohmann::json& node, std::string file, std::string path)
    : node_(&node), file_(std::move(file)), path_(std::move(path)) {}

JsonView::JsonView(const JsonDocument& doc) : JsonView(doc.root(), doc.origin()) {}

std::string JsonView::key_path(std::string_view key) const {
    if (path_.empty()) return std::string(key);
    return path_ + "." + std::string(key);
}

bool JsonView::is_object() const { return node_->is_object(); }
bool JsonView::is_array() const { return node_->is_array(); }
bool JsonView::is_null() const { return node_->is_null(); }

bool JsonView::has(std::string_view key) const {
    return node_->is_object() && node_->contains(std::string(key));
}

std::vector<std::string> JsonView::keys() const {
    std::vector<std::string> out;
    if (node_->is_object())
        for (auto it = node_->begin(); it != node_->end(); ++it) out.push_back(it.key());
    return out;
}

size_t JsonView::size() const { return node_->size(); }

void JsonView::fail(std::string_view key, const std::string& text) const {
    throw InputError(file_, key_path(key), text);
}

void JsonView::fail_here(const std::string& text) const {
    throw InputError(file_, path_.empty() ? std::string("(top level)") : path_, text);
}

std::optional<JsonView> JsonView::find(std::string_view key) const {
    if (!node_->is_object()) return std::nullopt;
    auto it = node_->find(std::string(key));
    if (it == node_->end()) return std::nullopt;
    return JsonView(*it, file_, key_path(key));
}

JsonView JsonView::at(std::string_view key) const {
    if (!node_->is_object()) fail_here("expected an object");
    auto found = find(key);
    if (!found) fail(key, "missing");
    return *found;
}

JsonView JsonView::at(size_t index) const {
    if (!node_->is_array()) fail_here("expected an array");
    if (index >= node_->size()) fail_here(fmt::format("has no element {}", index));
    return JsonView((*node_)[index], file_, fmt::format("{}[{}]", path_, index));
}

std::vector<JsonView> JsonView::elements() const {
    if (!node_->is_array()) fail_here("expected an array");
    std::vector<JsonView> out;
    out.reserve(node_->size());
    for (size_t i = 0; i < node_->size(); ++i)
        out.emplace_back((*node_)[i], file_, fmt::format("{}[{}]", path_, i));
    return out;
}

double JsonView::as_number() const {
    if (node_->is_number()) return node_->get<double>();
    if (node_->is_string()) {
        try {
            return parse_value(node_->get_ref<const std::string&>(), path_);
        } catch (const InputError& e) {
            throw e.in_file(file_);
        }
    }
    fail_here("expected a number or a value such as \"4k7\"");
}

double JsonView::number(std::string_view key) const { return at(key).as_number(); }

double JsonView::number_or(std::string_view key, double fallback) const {
    auto found = find(key);
    if (!found || found->is_null()) return fallback;
    return found->as_number();
}

std::optional<double> JsonView::optional_number(std::string_view key) const {
    auto found = find(key);
    if (!found || found->is_null()) return std::nullopt;
    return found->as_number();
}

double JsonView::tolerance_or(std::string_view key, double fallback) const {
    auto found = find(key);
    if (!found || found->is_null()) return fallback;
    const auto& n = found->node();
    if (n.is_number()) {
        const double t = n.get<double>();
        if (t < 0 || t >= 1) found->fail_here("a numeric tolerance is a fraction (0.05 for 5%)");
        return t;
    }
    if (!n.is_string()) found->fail_here("expected a tolerance such as \"5%\"");
    try {
        return parse_tolerance(n.get_ref<const std::string&>(), found->path());
    } catch (const InputError& e) {
        throw e.in_file(file_);
    }
}

std::string JsonView::as_string() const {
    if (!node_->is_string()) fail_here("expected a string");
    return node_->get<std::string>();
}

std::string JsonView::string(std::string_view key) const { return at(key).as_string(); }

std::string JsonView::string_or(std::string_view key, std::string fallback) const {
    auto found = find(key);
    if (!found || found->is_null()) return fallback;
    return found->as_string();
}

bool JsonView::boolean_or(std::string_view key, bool fallback) const {
    auto found = find(key);
    if (!found || found->is_null()) return fallback;
    if (!found->node().is_boolean()) found->fail_here("expected true or false");
    return found->node().get<bool>();
}

void JsonView::require_format(std::string_view expected) const {
    if (!node_->is_object()) fail_here("expected a JSON object");
    const std::string tag = string("format");
    if (tag == expected) return;
    const auto slash = expected.rfind('/');
    const std::string_view family = expected.substr(0, slash + 1);
    if (tag.rfind(family, 0) == 0) {
        const std::string theirs = tag.substr(family.size());
        const std::string ours(expected.substr(slash + 1));
        char* end = nullptr;
        const long their_v = std::strtol(theirs.c_str(), &end, 10);
        if (end && *end == '\0' && their_v > std::strtol(ours.c_str(), nullptr, 10))
            fail("format", fmt::format("'{}' is newer than this ampbench understands ({}); "
                                       "update ampbench",
                                       tag, expected));
    }
    fail("format", fmt::format("expected '{}', found '{}'", expected, tag));
}

void JsonView::reject_unknown_keys(const std::vector<std::string_view>& allowed) const {
    for (const auto& k : keys()) {
        bool ok = false;
        for (auto a : allowed) ok = ok || a == k;
        if (!ok) fail(k, "unknown key");
    }
}

}  // namespace ampbench
