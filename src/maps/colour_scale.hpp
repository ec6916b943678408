// Internal: latentlift's colour scales. Continuous fields: a sequential scale whose CIELAB
// lightness rises steadily while the hue turns from blue-violet to yellow, spaced by equal colour
// differences (perceptually even steps); classes: a fixed categorical palette.
#pragma once

#include <array>
#include <vector>

#include "maps/png_image.hpp"

namespace latentlift::maps::detail {

/// The sequential scale at t in [0, 1]. Design path u in [0, 1]: CIELAB L* = 20 + 72 u, hue 290 - 190 u
/// degrees, chroma 24 rising to 74 in the light half, inside sRGB (CIE 1976 L*a*b*, D65; sRGB per
/// IEC 61966-2-1); t is the CIE 1976 colour difference along that path, normalised, so equal steps
/// of t look equally different.
Rgb sequential_colour(double t);
/// n discrete colours of the scale, at the bin centres t = (k + 0.5) / n.
std::vector<Rgb> sequential_steps(int n);
/// The k-th colour of the categorical palette (cycles after 10).
Rgb category_colour(int k);

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

}  // namespace latentlift::maps::detail
