// The value syntax of DESIGN.md §4.1 (SI prefixes, IEC 60062 letter codes, optional unit) and
// an engineering-notation formatter for output.
#pragma once

#include <string>
#include <string_view>

namespace ampbench {

// Parses "470", "1e-6", "2.2u", "47k", "4k7", "2R2", "1n5", "47kΩ", "10uF", "12V".
// Throws InputError naming `field` and the text for anything else ("4k7k", "1.2.3", "", "abc").
double parse_value(std::string_view text, std::string_view field);

// Parses a tolerance written "5%" (returns 0.05). Throws InputError naming `field`.
double parse_tolerance(std::string_view text, std::string_view field);

// 4700 -> "4.7k", 1e-6 -> "1u", 0.0123 -> "12.3m"; `unit` is appended ("4.7kΩ").
// `digits` is the number of significant digits kept (trailing zeros dropped).
std::string format_eng(double value, std::string_view unit = {}, int digits = 4);

}  // namespace ampbench
