// Internal: a drawing surface for quicklook maps: cairo (antialiased vector drawing) with the DejaVu
// Sans font (Debian fonts-dejavu-core) loaded through FreeType. RAII over every cairo/FreeType handle.
#pragma once

#include <array>
#include <memory>
#include <string>
#include <vector>

#include "maps/png_image.hpp"

namespace latentlift::maps::detail {

using Point = std::array<double, 2>;  // pixels, x right, y down

/// Where the font files come from; Error naming the file when one is missing.
std::string font_path(bool bold);

/// Extent of a line of text: advance width, and ascent/descent of the font at that size (pixels).
struct TextExtent {
  double width = 0, ascent = 0, descent = 0;
  double height() const { return ascent + descent; }
};

class Canvas {
 public:
  Canvas(int width, int height, Rgb background);
  ~Canvas();
  Canvas(const Canvas&) = delete;
  Canvas& operator=(const Canvas&) = delete;

  int width() const { return width_; }
  int height() const { return height_; }

  /// Size of text in DejaVu Sans (bold or book) at size_px (em size in pixels).
  static TextExtent measure(const std::string& text, double size_px, bool bold = false);
  /// Draws text with its left end at x and its baseline at y.
  void text(double x, double baseline_y, const std::string& text, double size_px, Rgb colour, bool bold = false);

  /// Antialiased polyline; dash > 0 draws dashes of that length (pixels).
  void polyline(const std::vector<Point>& points, Rgb colour, double line_width, double alpha = 1.0, double dash = 0);
  /// Filled polygon, optionally outlined.
  void polygon(const std::vector<Point>& points, Rgb fill, const Rgb* outline = nullptr, double line_width = 1.0);
  void fill_rect(double x, double y, double w, double h, Rgb colour);
  /// A rectangle outline on pixel edges (crisp).
  void frame(double x, double y, double w, double h, Rgb colour, double line_width = 1.0);
  /// Diagonal hatching of a rectangle (the "missing" pattern of the map), as on the map.
  void hatch(double x, double y, double w, double h);
  /// Copies an RGB image (the map raster) with its top-left corner at pixel (x, y).
  void blit(const RgbImage& image, int x, int y);

  /// Later drawing only inside the rectangle, until reset_clip().
  void clip(double x, double y, double w, double h);
  void reset_clip();

  /// The pixels drawn so far.
  RgbImage pixels();

 private:
  struct Impl;
  std::unique_ptr<Impl> impl_;
  int width_, height_;
};

/// The colours of the missing-data hatching at a pixel (the same pattern as Canvas::hatch).
Rgb missing_pattern(int x, int y);

}  // namespace latentlift::maps::detail
