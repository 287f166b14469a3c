// Preferred-number series of IEC 60063 (E6, E12, E24, E96) and the value
// lists of `sweep` (NETLIST.md section 7): linear, geometric and eNN between
// two bounds, both bounds included when they fall on the series.
#pragma once

#include <optional>
#include <string>
#include <vector>

namespace ringdown {

// The significand table of series E<n> (n = 6, 12, 24, 96): values in [1, 10),
// or nullptr for another n.
const std::vector<double>* preferred_series(int n);

// Every value of series E<n> in [low, high] (0 < low <= high), in increasing
// order. A value counts as on the bound when within 1e-9 relative.
std::vector<double> preferred_values(int n, double low, double high);

// n >= 2 points from a to b, both included.
std::vector<double> linear_values(double a, double b, int n);
// n >= 2 points from a to b (same sign, non-zero) in constant ratio.
std::vector<double> geometric_values(double a, double b, int n);

}  // namespace ringdown
