// IEC 60063:2015 "Preferred number series for resistors and capacitors",
// tables 1 (E6, E12, E24) and 2 (E96), significands in [1, 10) (from
// memory). Note that E24 departs from round(10^(k/24)) at 2.7 ... 4.7 and
// 8.2 for historical reasons, so it must be tabulated; E96 equals
// 10^(k/96) rounded to three significant figures (checked in the tests).
#include "parser/eseries.hpp"

#include <cmath>

namespace ringdown {

namespace {

const std::vector<double> kE6 = {1.0, 1.5, 2.2, 3.3, 4.7, 6.8};
const std::vector<double> kE12 = {1.0, 1.2, 1.5, 1.8, 2.2, 2.7, 3.3, 3.9, 4.7, 5.6, 6.8, 8.2};
const std::vector<double> kE24 = {1.0, 1.1, 1.2, 1.3, 1.5, 1.6, 1.8, 2.0, 2.2, 2.4, 2.7, 3.0,
                                  3.3, 3.6, 3.9, 4.3, 4.7, 5.1, 5.6, 6.2, 6.8, 7.5, 8.2, 9.1};
const std::vector<double> kE96 = {
    1.00, 1.02, 1.05, 1.07, 1.10, 1.13, 1.15, 1.18, 1.21, 1.24, 1.27, 1.30, 1.33, 1.37,
    1.40, 1.43, 1.47, 1.50, 1.54, 1.58, 1.62, 1.65, 1.69, 1.74, 1.78, 1.82, 1.87, 1.91,
    1.96, 2.00, 2.05, 2.10, 2.15, 2.21, 2.26, 2.32, 2.37, 2.43, 2.49, 2.55, 2.61, 2.67,
    2.74, 2.80, 2.87, 2.94, 3.01, 3.09, 3.16, 3.24, 3.32, 3.40, 3.48, 3.57, 3.65, 3.74,
    3.83, 3.92, 4.02, 4.12, 4.22, 4.32, 4.42, 4.53, 4.64, 4.75, 4.87, 4.99, 5.11, 5.23,
    5.36, 5.49, 5.62, 5.76, 5.90, 6.04, 6.19, 6.34, 6.49, 6.65, 6.81, 6.98, 7.15, 7.32,
    7.50, 7.68, 7.87, 8.06, 8.25, 8.45, 8.66, 8.87, 9.09, 9.31, 9.53, 9.76};

// Relative tolerance for "the bound is on the series": values typed by hand
// (4.7k) and computed decades (4.7 * 10^3) differ in the last bits only.
constexpr double kOnSeries = 1e-9;

}  // namespace

const std::vector<double>* preferred_series(int n) {
  switch (n) {
    case 6: return &kE6;
    case 12: return &kE12;
    case 24: return &kE24;
    case 96: return &kE96;
    default: return nullptr;
  }
}

std::vector<double> preferred_values(int n, double low, double high) {
  std::vector<double> out;
  const std::vector<double>* table = preferred_series(n);
  if (!table || !(low > 0) || !(high >= low)) return out;
  int decade = static_cast<int>(std::floor(std::log10(low))) - 1;
  const int last = static_cast<int>(std::floor(std::log10(high))) + 1;
  for (; decade <= last; ++decade) {
    for (double s : *table) {
      // Round to the significand's own precision so 4.7 * 1e3 prints as 4700.
      // Exact powers of ten up to 1e22 make the division correctly rounded,
      // so 4.7 in decade 3 is exactly the double nearest 4700.
      const double hundredths = std::round(s * 100);
      const int shift = decade - 2;
      double v = shift < 0 ? hundredths / std::pow(10.0, -shift) : hundredths * std::pow(10.0, shift);
      if (v >= low * (1 - kOnSeries) && v <= high * (1 + kOnSeries)) out.push_back(v);
    }
  }
  return out;
}

std::vector<double> linear_values(double a, double b, int n) {
  std::vector<double> out;
  if (n < 2) return out;
  for (int k = 0; k < n; ++k) out.push_back(k == n - 1 ? b : a + (b - a) * k / (n - 1));
  return out;
}

std::vector<double> geometric_values(double a, double b, int n) {
  std::vector<double> out;
  if (n < 2 || a == 0 || b == 0 || (a < 0) != (b < 0)) return out;
  const double ratio = std::pow(b / a, 1.0 / (n - 1));
  for (int k = 0; k < n; ++k) out.push_back(k == n - 1 ? b : a * std::pow(ratio, k));
  return out;
}

}  // namespace ringdown
