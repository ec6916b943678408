// Internal: latentlift's colour scales (our own design, README "Colour scale").
// Continuous fields: "spruce to blush", a sequential scale whose CIELAB lightness rises steadily
// from a dark spruce green-blue through steel blue, lavender and rose to a pale blush, spaced by
// equal colour differences. Classes: a categorical palette of our own, spread in lightness.
#pragma once

#include <array>
#include <vector>

#include "maps/png_image.hpp"

namespace latentlift::maps::detail {

/// The sequential scale at t in [0, 1] (0 dark, 1 light). Design path u in [0, 1]: CIELAB
/// L* = 20 + 74 u; chroma and hue linear between the nodes u = 0, 0.3, 0.55, 0.8, 1 with chroma
/// 14, 26, 34, 24, 8 and hue 200, 252, 295, 335, 10 degrees (CIE 1976 L*a*b*, D65; sRGB per
/// IEC 61966-2-1). t is the CIE 1976 colour difference along that path, normalised, so equal
/// steps of t are equal colour differences.
Rgb sequential_colour(double t);
/// n discrete colours of the scale, at the bin centres t = (k + 0.5) / n.
std::vector<Rgb> sequential_steps(int n);
/// The k-th colour of the categorical palette (10 colours, cycles after 10; the first 5 stay
/// apart under the simulated colour-vision deficiencies, tests/maps/check_colour_scale.py).
Rgb category_colour(int k);
/// "Not applicable" (column analysed, quantity undefined: no latent instability, no LFC):
/// a pale sand, a hue the sequential scale never takes.
Rgb not_applicable_colour();

/// CIELAB of an sRGB colour (D65), for checks: {L*, a*, b*}.
std::array<double, 3> srgb_to_lab(Rgb colour);

/// Bins of a colour bar: `count` bins of width `step` from `low`, with round ("nice") edges.
struct ColourBins {
  double low = 0, step = 1;
  int count = 1;
  double high() const { return low + step * count; }
  /// Bin of a value (clamped to the first/last bin).
  int bin_of(double value) const;
};
/// Round bins covering [min, max] with at most max_bins bins (steps 1, 2, 2.5 or 5 times a power of ten).
ColourBins nice_bins(double min, double max, int max_bins = 16);
/// The p-th percentile (0..100) of the finite values, linear between order statistics
/// (Hyndman and Fan 1996, definition 7); NaN when there are none.
double percentile(std::vector<double> values, double p);

}  // namespace latentlift::maps::detail
