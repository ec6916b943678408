// Internal: a built-in 5x7 bitmap font (ASCII 32-126) for titles and legends of quicklook maps.
#pragma once

#include <string>

#include "maps/png_image.hpp"

namespace latentlift::maps::detail {

constexpr int kGlyphWidth = 5, kGlyphHeight = 7, kGlyphAdvance = 6;

/// Draws text with its top-left corner at (x, y); each font pixel becomes scale x scale pixels.
/// Characters outside ASCII 32-126 are drawn as '?'. Tails of g, p, q, y reach 2 rows below the 7.
void draw_text(RgbImage& image, int x, int y, const std::string& text, Rgb colour, int scale = 1);
/// Width in pixels of text drawn at scale.
inline int text_width(const std::string& text, int scale = 1) {
  return text.empty() ? 0 : (static_cast<int>(text.size()) * kGlyphAdvance - 1) * scale;
}

}  // namespace latentlift::maps::detail
