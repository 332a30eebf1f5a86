// IEC 60063 tables and decade-aware snapping.
#include "fit/units/eseries.h"

#include <array>
#include <cctype>
#include <cmath>
#include <string>

#include <fmt/format.h>

#include "core/errors.h"

namespace ampbench::units {
namespace {

// IEC 60063:2015, tables of the E6, E12, E24 (two figures) and E48, E96 (three figures) series.
constexpr std::array<int, 6> kE6{10, 15, 22, 33, 47, 68};
constexpr std::array<int, 12> kE12{10, 12, 15, 18, 22, 27, 33, 39, 47, 56, 68, 82};
constexpr std::array<int, 24> kE24{10, 11, 12, 13, 15, 16, 18, 20, 22, 24, 27, 30,
                                   33, 36, 39, 43, 47, 51, 56, 62, 68, 75, 82, 91};
constexpr std::array<int, 48> kE48{100, 105, 110, 115, 121, 127, 133, 140, 147, 154, 162, 169,
                                   178, 187, 196, 205, 215, 226, 237, 249, 261, 274, 287, 301,
                                   316, 332, 348, 365, 383, 402, 422, 442, 464, 487, 511, 536,
                                   562, 590, 619, 649, 681, 715, 750, 787, 825, 866, 909, 953};
constexpr std::array<int, 96> kE96{
    100, 102, 105, 107, 110, 113, 115, 118, 121, 124, 127, 130, 133, 137, 140, 143,
    147, 150, 154, 158, 162, 165, 169, 174, 178, 182, 187, 191, 196, 200, 205, 210,
    215, 221, 226, 232, 237, 243, 249, 255, 261, 267, 274, 280, 287, 294, 301, 309,
    316, 324, 332, 340, 348, 357, 365, 374, 383, 392, 402, 412, 422, 432, 442, 453,
    464, 475, 487, 499, 511, 523, 536, 549, 562, 576, 590, 604, 619, 634, 649, 665,
    681, 698, 715, 732, 750, 768, 787, 806, 825, 845, 866, 887, 909, 931, 953, 976};

// The table's values are mantissas with this many digits before the decimal point.
double table_scale(ESeries series) {
    return (series == ESeries::e48 || series == ESeries::e96) ? 100.0 : 10.0;
}

// Member k of the series counted from 10^0 (k may be negative or exceed one decade).
double member(ESeries series, long k) {
    const auto values = series_values(series);
    const long n = static_cast<long>(values.size());
    long decade = k / n;
    long index = k % n;
    if (index < 0) {
        index += n;
        decade -= 1;
    }
    return values[static_cast<size_t>(index)] / table_scale(series) *
           std::pow(10.0, static_cast<double>(decade));
}

void check_positive(double value) {
    if (!(value > 0) || !std::isfinite(value))
        throw InputError("", "value", fmt::format("cannot snap {} to a preferred value", value));
}

// Index of the largest member <= value (with a relative slack so exact members stay put).
long floor_index(double value, ESeries series) {
    const long n = series_size(series);
    const double decade = std::floor(std::log10(value));
    long k = static_cast<long>(decade) * n;
    // Walk from the decade start; at most n + 2 steps.
    while (member(series, k + 1) <= value * (1 + 1e-9)) ++k;
    while (member(series, k) > value * (1 + 1e-9)) --k;
    return k;
}

}  // namespace

std::span<const int> series_values(ESeries series) {
    switch (series) {
        case ESeries::e6: return kE6;
        case ESeries::e12: return kE12;
        case ESeries::e24: return kE24;
        case ESeries::e48: return kE48;
        case ESeries::e96: return kE96;
    }
    return kE24;
}

int series_size(ESeries series) { return static_cast<int>(series_values(series).size()); }

std::string_view series_name(ESeries series) {
    switch (series) {
        case ESeries::e6: return "E6";
        case ESeries::e12: return "E12";
        case ESeries::e24: return "E24";
        case ESeries::e48: return "E48";
        case ESeries::e96: return "E96";
    }
    return "E24";
}

ESeries parse_series(std::string_view name, std::string_view field) {
    std::string upper;
    for (char c : name) upper += static_cast<char>(std::toupper(static_cast<unsigned char>(c)));
    for (ESeries s : {ESeries::e6, ESeries::e12, ESeries::e24, ESeries::e48, ESeries::e96})
        if (series_name(s) == upper) return s;
    throw InputError("", std::string(field),
                     fmt::format("unknown E-series '{}' (use E6, E12, E24, E48 or E96)", name));
}

double snap_down(double value, ESeries series) {
    check_positive(value);
    return member(series, floor_index(value, series));
}

double snap_up(double value, ESeries series) {
    check_positive(value);
    const long k = floor_index(value, series);
    const double below = member(series, k);
    if (std::abs(below - value) <= 1e-9 * value) return below;
    return member(series, k + 1);
}

double snap_nearest(double value, ESeries series) {
    check_positive(value);
    const long k = floor_index(value, series);
    const double below = member(series, k);
    const double above = member(series, k + 1);
    // Geometric midpoint: preferred numbers are spaced evenly on a log scale.
    return value * value < below * above ? below : above;
}

}  // namespace ampbench::units
