// Preferred-number series E6 … E96 of IEC 60063 and snapping a value to the nearest, next higher
// or next lower member of a series in any decade.
#pragma once

#include <span>
#include <string_view>

namespace ampbench::units {

enum class ESeries { e6, e12, e24, e48, e96 };

// The series' values in one decade, as IEC 60063 lists them: two significant figures for E6–E24
// (10 … 91), three for E48 and E96 (100 … 976).
std::span<const int> series_values(ESeries series);
// Members per decade (6, 12, 24, 48, 96).
int series_size(ESeries series);
// "E24" -> ESeries::e24 (case-insensitive); InputError naming `field` otherwise.
ESeries parse_series(std::string_view name, std::string_view field = "series");
std::string_view series_name(ESeries series);

// The member nearest to `value` on a logarithmic scale (ties go up). `value` must be > 0.
double snap_nearest(double value, ESeries series);
// The smallest member >= value (a value already on the series, within 1e-9, is kept).
double snap_up(double value, ESeries series);
// The largest member <= value (a value already on the series, within 1e-9, is kept).
double snap_down(double value, ESeries series);

}  // namespace ampbench::units
