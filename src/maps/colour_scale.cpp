// Colour scales computed from CIELAB (CIE 1976) and sRGB (IEC 61966-2-1) formulas.
#include "maps/colour_scale.hpp"

#include <algorithm>
#include <cmath>
#include <iterator>

namespace latentlift::maps::detail {

namespace {

constexpr double kPi = 3.14159265358979323846;
// D65 reference white (CIE 15:2004).
constexpr double kXn = 0.95047, kYn = 1.0, kZn = 1.08883;

double lab_f_inverse(double t) {
  constexpr double d = 6.0 / 29.0;
  return t > d ? t * t * t : 3.0 * d * d * (t - 4.0 / 29.0);
}
double lab_f(double t) {
  constexpr double d = 6.0 / 29.0;
  return t > d * d * d ? std::cbrt(t) : t / (3.0 * d * d) + 4.0 / 29.0;
}
double gamma_encode(double c) { return c <= 0.0031308 ? 12.92 * c : 1.055 * std::pow(c, 1.0 / 2.4) - 0.055; }
double gamma_decode(double c) { return c <= 0.04045 ? c / 12.92 : std::pow((c + 0.055) / 1.055, 2.4); }

// Linear sRGB of a CIELAB colour; false when outside the sRGB gamut.
bool lab_to_linear_rgb(double L, double a, double b, double rgb[3]) {
  double fy = (L + 16.0) / 116.0, fx = fy + a / 500.0, fz = fy - b / 200.0;
  double X = kXn * lab_f_inverse(fx), Y = kYn * lab_f_inverse(fy), Z = kZn * lab_f_inverse(fz);
  rgb[0] = 3.2406 * X - 1.5372 * Y - 0.4986 * Z;
  rgb[1] = -0.9689 * X + 1.8758 * Y + 0.0415 * Z;
  rgb[2] = 0.0557 * X - 0.2040 * Y + 1.0570 * Z;
  for (int k = 0; k < 3; ++k)
    if (rgb[k] < -1e-9 || rgb[k] > 1.0 + 1e-9) return false;
  return true;
}

std::uint8_t to_byte(double c) { return static_cast<std::uint8_t>(std::lround(std::clamp(c, 0.0, 1.0) * 255.0)); }

}  // namespace

namespace {

// Nodes of the design path (u, chroma, hue in degrees); L* = 20 + 74 u. The hue turns from
// spruce (200) through steel blue (252), lavender (295) and rose (335) to blush (370 = 10).
// Chroma follows the sRGB gamut, which is narrow for dark blue-green and for very light colours:
// the path stays at least 1 unit inside it (checked at 201 points); the reduction below is a safeguard only.
struct Node {
  double u, chroma, hue;
};
constexpr Node kNodes[] = {{0.0, 14, 200}, {0.3, 26, 252}, {0.55, 34, 295}, {0.8, 24, 335}, {1.0, 8, 370}};

void design_path(double u, double lab[3], double rgb[3]) {
  std::size_t k = 0;
  while (k + 2 < std::size(kNodes) && u > kNodes[k + 1].u) ++k;
  const Node& a = kNodes[k];
  const Node& b = kNodes[k + 1];
  double w = std::clamp((u - a.u) / (b.u - a.u), 0.0, 1.0);
  double L = 20.0 + 74.0 * u, chroma = a.chroma + w * (b.chroma - a.chroma);
  double hue = (a.hue + w * (b.hue - a.hue)) * kPi / 180.0;
  while (!lab_to_linear_rgb(L, chroma * std::cos(hue), chroma * std::sin(hue), rgb) && chroma > 0.0) chroma -= 0.25;
  lab[0] = L;
  lab[1] = chroma * std::cos(hue);
  lab[2] = chroma * std::sin(hue);
}

// Cumulative CIE 1976 colour difference along the design path at 1024 + 1 samples, normalised to 1:
// equal steps of t are then equal colour differences (perceptually even steps).
const std::vector<double>& arc_length() {
  static const std::vector<double> table = [] {
    const int n = 1024;
    std::vector<double> s(n + 1, 0.0);
    double previous[3], lab[3], rgb[3];
    design_path(0.0, previous, rgb);
    for (int k = 1; k <= n; ++k) {
      design_path(static_cast<double>(k) / n, lab, rgb);
      s[k] = s[k - 1] + std::sqrt((lab[0] - previous[0]) * (lab[0] - previous[0]) +
                                  (lab[1] - previous[1]) * (lab[1] - previous[1]) +
                                  (lab[2] - previous[2]) * (lab[2] - previous[2]));
      std::copy(lab, lab + 3, previous);
    }
    for (double& v : s) v /= s[n];
    return s;
  }();
  return table;
}

}  // namespace

Rgb sequential_colour(double t) {
  t = std::clamp(t, 0.0, 1.0);
  const auto& s = arc_length();
  const int n = static_cast<int>(s.size()) - 1;
  int k = static_cast<int>(std::upper_bound(s.begin(), s.end(), t) - s.begin()) - 1;
  k = std::clamp(k, 0, n - 1);
  double u = (k + (s[k + 1] > s[k] ? (t - s[k]) / (s[k + 1] - s[k]) : 0.0)) / n;
  double lab[3], rgb[3];
  design_path(u, lab, rgb);
  return {to_byte(gamma_encode(rgb[0])), to_byte(gamma_encode(rgb[1])), to_byte(gamma_encode(rgb[2]))};
}

std::vector<Rgb> sequential_steps(int n) {
  std::vector<Rgb> out;
  for (int k = 0; k < n; ++k) out.push_back(sequential_colour((k + 0.5) / n));
  return out;
}

Rgb category_colour(int k) {
  // Our own, designed in CIELAB (L*, C*, hue): stone (92, 8, 95), copper (70, 48, 62), wine (36, 48, 10),
  // teal (56, 30, 200), indigo (28, 32, 290), lime (82, 45, 115), orchid (62, 42, 328), moss (44, 26, 145),
  // sky (76, 20, 245), umber (22, 12, 50). Lightness alternates so that neighbours in the legend
  // differ in grey too.
  static const Rgb palette[] = {{237, 232, 217}, {230, 154, 95},  {153, 44, 73},  {40, 148, 151},
                                {52, 63, 112},   {195, 212, 126}, {194, 127, 190}, {75, 113, 79},
                                {149, 193, 220}, {68, 48, 39}};
  return palette[((k % 10) + 10) % 10];
}

Rgb not_applicable_colour() { return {230, 207, 161}; }  // CIELAB L* 84, C* 26, hue 88

std::array<double, 3> srgb_to_lab(Rgb colour) {
  double r = gamma_decode(colour[0] / 255.0), g = gamma_decode(colour[1] / 255.0), b = gamma_decode(colour[2] / 255.0);
  double X = 0.4124 * r + 0.3576 * g + 0.1805 * b;
  double Y = 0.2126 * r + 0.7152 * g + 0.0722 * b;
  double Z = 0.0193 * r + 0.1192 * g + 0.9505 * b;
  double fx = lab_f(X / kXn), fy = lab_f(Y / kYn), fz = lab_f(Z / kZn);
  return {116.0 * fy - 16.0, 500.0 * (fx - fy), 200.0 * (fy - fz)};
}

int ColourBins::bin_of(double value) const {
  int k = static_cast<int>(std::floor((value - low) / step));
  return std::clamp(k, 0, count - 1);
}

ColourBins nice_bins(double min, double max, int max_bins) {
  if (!(max > min)) {
    double half = std::max(std::fabs(min) * 0.05, 0.5);
    min -= half;
    max += half;
  }
  double raw = (max - min) / max_bins;
  double power = std::pow(10.0, std::floor(std::log10(raw)));
  double step = power * 10.0;
  for (double m : {1.0, 2.0, 2.5, 5.0, 10.0})
    if (m * power >= raw * (1 - 1e-12)) {
      step = m * power;
      break;
    }
  ColourBins bins;
  for (;;) {
    bins.step = step;
    bins.low = std::floor(min / step) * step;
    bins.count = std::max(1, static_cast<int>(std::ceil((max - bins.low) / step - 1e-9)));
    if (bins.count <= max_bins) break;
    step *= 2.0;  // floor() of the low edge can add one bin too many
  }
  return bins;
}

}  // namespace latentlift::maps::detail

namespace latentlift::maps::detail {

double percentile(std::vector<double> values, double p) {
  values.erase(std::remove_if(values.begin(), values.end(), [](double v) { return !std::isfinite(v); }), values.end());
  if (values.empty()) return std::nan("");
  std::sort(values.begin(), values.end());
  double h = (static_cast<double>(values.size()) - 1.0) * std::clamp(p, 0.0, 100.0) / 100.0;
  auto lo = static_cast<std::size_t>(std::floor(h));
  std::size_t hi = std::min(lo + 1, values.size() - 1);
  return values[lo] + (h - static_cast<double>(lo)) * (values[hi] - values[lo]);
}

}  // namespace latentlift::maps::detail
