// See pole_plot.hpp. Everything is drawn as inline data (poles, damping
// rays, decade circles), so a text plot gets the same guides as an image.
#include "cli/pole_plot.hpp"

#include <algorithm>
#include <cmath>
#include <limits>
#include <numbers>
#include <sstream>
#include <utility>

namespace ringdown::cli {

namespace {

constexpr double kTwoPi = 2 * std::numbers::pi;
// Damping-ratio guides (issue 5): rays at zeta = cos(angle from the negative
// real axis).
constexpr double kZetaGuides[] = {0.1, 0.3, 0.5, 0.7};
// Image: the plane has one scale on both axes and is taller than wide (the
// left half-plane, both conjugates); the key, when there is one, to its right.
constexpr ImageSize kImageWithKey{820, 800};
constexpr ImageSize kImageAlone{560, 800};
// The plane reaches 10 % beyond the farthest pole, and shows a strip of the
// right half-plane a fifth as wide as the radius (more if a pole grows).
constexpr double kReach = 1.1;
constexpr double kRightStrip = 0.2;
// Logarithmic radius: the centre half a decade inside the slowest pole, the
// rim a quarter decade beyond the fastest.
constexpr double kInnerDecades = 0.5, kOuterDecades = 0.25;
constexpr int kCircleSegments = 180;
// Open markers first, so poles of two configurations on one spot both show
// (gnuplot 5.4 point types: 6 circle, 4 square, 8 triangle, 12 diamond,
// 10 triangle down, 14 pentagon, then 2 x, 1 +, 3 star).
constexpr int kPointTypes[] = {6, 4, 8, 12, 10, 14, 2, 1, 3};
// Text plot: the key lines under the plot, the x label and the tick labels.
constexpr int kTextAxisRows = 2;
constexpr int kTextPlaneRows = 8;

using Point = std::pair<double, double>;

// A key only tells configurations apart: none for a circuit without switches.
bool has_key(const PoleMapRequest& request) { return request.sets.size() > 1; }

// Where a pole goes on the page, in plot units.
struct Plane {
  bool log = false;
  Scale scale;        // linear: Hz per plot unit and its prefix
  double centre = 0;  // logarithmic: log10 of the natural frequency at the centre
  double radius = 1;  // the farthest pole's distance (linear) or the rim (logarithmic)

  Point map(std::complex<double> s) const {
    const std::complex<double> hz = s / kTwoPi;
    if (!log) return {hz.real() / scale.factor, hz.imag() / scale.factor};
    const double m = std::abs(hz);
    if (m == 0) return {0, 0};
    const double r = std::max(0.0, std::log10(m) - centre);
    return {r * hz.real() / m, r * hz.imag() / m};
  }
};

// The smallest and largest nonzero |s| / (2 pi) (high = 0: none).
std::pair<double, double> natural_range(const std::vector<PoleSet>& sets) {
  double low = std::numeric_limits<double>::infinity(), high = 0;
  for (const PoleSet& set : sets)
    for (std::complex<double> s : set.poles) {
      const double m = std::abs(s) / kTwoPi;
      if (m > 0 && std::isfinite(m)) low = std::min(low, m), high = std::max(high, m);
    }
  return {low, high};
}

Plane plane_for(const std::vector<PoleSet>& sets, bool text) {
  const auto [low, high] = natural_range(sets);
  Plane plane;
  if (!(high > 0)) {
    plane.scale = si_scale(1, text);
    return plane;
  }
  plane.log = logarithmic_radius(sets);
  if (plane.log) {
    plane.centre = std::log10(low) - kInnerDecades;
    plane.radius = std::log10(high) + kOuterDecades - plane.centre;
  } else {
    plane.scale = si_scale(high, text);
    plane.radius = high / plane.scale.factor;
  }
  return plane;
}

// Segments as inline data: points, a blank line between segments.
void append_segments(std::ostringstream& gp, const std::vector<std::vector<Point>>& segments) {
  char line[64];
  for (const auto& segment : segments) {
    for (const auto& [x, y] : segment) {
      std::snprintf(line, sizeof line, "%.10g %.10g\n", x, y);
      gp << line;
    }
    gp << "\n";
  }
  gp << "e\n";
}

// Rows of a text plot's key: one per configuration, but never so many that
// the plane gets fewer than kTextPlaneRows rows (the last line then refers
// to the table for the rest).
int text_key_rows(const PoleMapRequest& request, const TerminalSize& size) {
  if (!has_key(request)) return 0;
  const int room = std::max(1, size.lines - 3 - kTextAxisRows - kTextPlaneRows);
  return std::min(static_cast<int>(request.sets.size()), room);
}

// Text placed on the plane: drawn as a `with labels` plot between the
// guides and the poles, so a guide never cuts through a label and a label
// never hides a pole.
struct PlaneLabel {
  double x = 0, y = 0;
  std::string text;
};

// Labels as inline data: x, y and the text in double quotes (gnuplot 5.4
// help "datafile": a quoted string is one column; the texts here hold no '"').
void append_labels(std::ostringstream& gp, const std::vector<PlaneLabel>& labels) {
  char line[64];
  for (const PlaneLabel& l : labels) {
    std::snprintf(line, sizeof line, "%.10g %.10g ", l.x, l.y);
    gp << line << '"' << l.text << "\"\n";
  }
  gp << "e\n";
}

// The marker of configuration i in a text plot: its number, then letters.
char text_marker(std::size_t i) {
  static constexpr char kMarkers[] = "123456789abcdefghijklmnopqrstuvwxyz";
  return kMarkers[i % (sizeof kMarkers - 1)];
}

// The page's frame: ranges, margins, key and axis labels.
std::string frame_commands(const PoleMapRequest& request, const Plane& plane,
                           const TerminalSize& size, double left, double right, double top) {
  const bool text = request.target.text();
  std::ostringstream gp;
  gp.precision(10);
  gp << "set xrange [" << left << ":" << right << "]\nset yrange [" << -top << ":" << top << "]\n";
  const int key_rows = text_key_rows(request, size);
  const double last_row = size.lines - 1;
  if (text) {
    // Under the plane: one row per configuration (its key line), the x label
    // and the tick labels.
    gp << "set lmargin " << kTextLeftMargin << "\nset rmargin 2\nunset key\n";
    gp << "set tmargin at screen " << (size.lines - 2 + 0.25) / last_row << "\n";
    gp << "set bmargin at screen " << (key_rows + kTextAxisRows + 0.25) / last_row << "\n";
    const std::size_t sets = request.sets.size();
    for (int i = 0; i < key_rows; ++i) {
      const auto k = static_cast<std::size_t>(i);
      // Short of rows: the last line points to the table for the rest.
      const std::string line = i + 1 == key_rows && sets > k + 1
                                   ? std::string(1, text_marker(k)) + ".." + text_marker(sets - 1) +
                                         "  configurations " + std::to_string(k + 1) + " to " +
                                         std::to_string(sets) + " of the table"
                                   : std::string(1, text_marker(k)) + "  " + request.sets[k].label;
      gp << "set label " << i + 2 << " " << gnuplot_quoted(fit_text(line, size.columns))
         << " at screen 0, screen " << (key_rows - 1 - i + 0.25) / last_row << " left\n";
    }
  } else {
    // One scale on both axes, so the rays keep their angles.
    gp << "set size ratio -1\nset tmargin 3\n";
    if (has_key(request))
      gp << "set key outside right top Left reverse spacing 1.3 title 'switch configuration'\n";
    else
      gp << "unset key\n";
    gp << "set xzeroaxis lt -1 lc rgb '#808080'\nset yzeroaxis lt -1 lc rgb '#808080'\n";
  }
  const std::string two_pi = text ? "2pi" : "2\xCF\x80";  // U+03C0 pi
  const std::string unit = " (" + plane.scale.prefix + "Hz)";
  const std::string x_label =
      plane.log ? "real part   (log radius: one step per decade of |s|/" + two_pi + ")"
                : "Re(s)/" + two_pi + unit;
  const std::string y_label = plane.log ? "imaginary part" : "Im(s)/" + two_pi + unit;
  gp << "set xlabel "
     << gnuplot_quoted(text ? fit_text(x_label, size.columns - kTextLeftMargin) : x_label) << "\n";
  if (text)
    gp << "set label 1 " << gnuplot_quoted(y_label)
       << " at graph 0, graph 1 left front offset 1,0\n";
  else
    gp << "set ylabel " << gnuplot_quoted(y_label) << "\n";
  if (!plane.log) {
    gp << "set format '% h'\n";
    if (text)
      gp << text_y_axis(-top, top, size.lines - 2 - (key_rows + kTextAxisRows) - 1);
    else
      gp << "set style line 100 lc rgb '#e4e4e4' lw 1\nset grid xtics ytics ls 100\n";
  }
  return gp.str();
}

// The damping rays (upper and lower) as segments, and their labels.
std::vector<std::vector<Point>> damping_rays(const Plane& plane, bool text, double left, double top,
                                             std::vector<PlaneLabel>& labels) {
  std::vector<std::vector<Point>> rays;
  for (double zeta : kZetaGuides) {
    const double dx = -zeta, dy = std::sqrt(1 - zeta * zeta);
    const double t = plane.log ? plane.radius : std::min(-left / zeta, top / dy);
    rays.push_back({{0, 0}, {t * dx, t * dy}});
    rays.push_back({{0, 0}, {t * dx, -t * dy}});
    char name[32];
    std::snprintf(name, sizeof name, text ? "%.1f" : "\xCE\xB6 = %.1f", zeta);  // U+03B6 zeta
    // Just beyond the rim (logarithmic), or just short of the plane's edge.
    const double at = plane.log ? t * 1.02 : t * 0.93;
    labels.push_back({at * dx, at * dy, name});
  }
  return rays;
}

// The decades of a logarithmic radius: in an image circles labelled on the
// positive imaginary axis; in a text plot (where circles would bury the
// poles) labelled ticks along the negative real axis, where a real pole of
// that natural frequency sits.
std::vector<std::vector<Point>> decade_marks(const Plane& plane, bool text, int plot_columns,
                                             std::ostringstream& gp,
                                             std::vector<PlaneLabel>& labels) {
  std::vector<std::vector<Point>> circles;
  if (!plane.log) return circles;
  const int first = static_cast<int>(std::floor(plane.centre)) + 1;
  const int last = static_cast<int>(std::floor(plane.centre + plane.radius));
  if (text) {
    // A label every k-th decade so labels ("100k") stay apart.
    const double columns_per_decade =
        plot_columns / (kReach * plane.radius + kRightStrip * plane.radius);
    const int every =
        std::max(1, static_cast<int>(std::ceil(kTextTickColumns / columns_per_decade)));
    gp << "set xtics (";
    for (int k = first; k <= last; ++k)
      gp << (k > first ? ", " : "")
         << gnuplot_quoted((k - first) % every ? "" : si_tick_label(std::pow(10.0, k), true)) << " "
         << -(k - plane.centre);
    gp << ")\nunset ytics\n";
    return circles;
  }
  gp << "unset xtics\nunset ytics\n";
  for (int k = first; k <= last; ++k) {
    const double r = k - plane.centre;
    std::vector<Point> circle;
    for (int i = 0; i <= kCircleSegments; ++i) {
      const double a = kTwoPi * i / kCircleSegments;
      circle.emplace_back(r * std::cos(a), r * std::sin(a));
    }
    circles.push_back(std::move(circle));
    labels.push_back({0.02 * plane.radius, r, si_tick_label(std::pow(10.0, k), false) + " Hz"});
  }
  return circles;
}

std::string script(const PoleMapRequest& request, const TerminalSize& size) {
  const bool text = request.target.text();
  const Plane plane = plane_for(request.sets, text);
  double right = kRightStrip * plane.radius;
  for (const PoleSet& set : request.sets)
    for (std::complex<double> s : set.poles) right = std::max(right, kReach * plane.map(s).first);
  const double left = -kReach * plane.radius, top = kReach * plane.radius;

  std::ostringstream gp;
  gp.precision(10);
  gp << page_commands(request.title, text, size.columns);
  gp << frame_commands(request, plane, size, left, right, top);
  std::vector<PlaneLabel> ray_labels, circle_labels;
  const auto rays = damping_rays(plane, text, left, top, ray_labels);
  const auto circles =
      decade_marks(plane, text, size.columns - kTextLeftMargin - 2, gp, circle_labels);

  gp << "plot '-' with lines " << (text ? "lt 0" : "lc rgb '#a8a8a8' dt 2") << " notitle";
  if (!circles.empty()) gp << ", '-' with lines lc rgb '#d8d8d8' notitle";
  gp << ", '-' using 1:2:3 with labels right " << (text ? "" : "offset -0.4,0 tc rgb '#606060' ")
     << "notitle";
  if (!circle_labels.empty())
    gp << ", '-' using 1:2:3 with labels left offset 0,0.5 tc rgb '#606060' notitle";
  for (std::size_t i = 0; i < request.sets.size(); ++i) {
    gp << ", '-' with points ";
    if (text)
      gp << "pt " << gnuplot_quoted(std::string(1, text_marker(i)));
    else
      gp << "lt " << i + 1 << " pt " << kPointTypes[i % std::size(kPointTypes)] << " ps 1.8 lw 1.5";
    gp << " title " << gnuplot_quoted(std::to_string(i + 1) + ": " + request.sets[i].label);
  }
  gp << "\n";
  append_segments(gp, rays);
  if (!circles.empty()) append_segments(gp, circles);
  append_labels(gp, ray_labels);
  if (!circle_labels.empty()) append_labels(gp, circle_labels);
  for (const PoleSet& set : request.sets) {
    std::vector<Point> points;
    for (std::complex<double> s : set.poles) points.push_back(plane.map(s));
    if (points.empty())
      gp << "NaN NaN\ne\n";  // a configuration without poles
    else
      append_points(gp, points);
  }
  gp << "unset multiplot\n";
  return gp.str();
}

}  // namespace

bool logarithmic_radius(const std::vector<PoleSet>& sets) {
  const auto [low, high] = natural_range(sets);
  return high > 0 && high / low > kLinearSpread;
}

bool draw_pole_map(const PoleMapRequest& request, std::string& error) {
  return render_figure(
      request.target, has_key(request) ? kImageWithKey : kImageAlone,
      [&](const TerminalSize& size) { return script(request, size); }, error);
}

}  // namespace ringdown::cli
