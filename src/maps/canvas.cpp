// Drawing for quicklook maps: cairo image surfaces, DejaVu Sans through FreeType (cairo-ft).
#include "maps/canvas.hpp"

#include <cairo-ft.h>
#include <cairo.h>
#include <ft2build.h>
#include FT_FREETYPE_H

#include <filesystem>
#include <mutex>

#include "latentlift/errors.hpp"

namespace latentlift::maps::detail {

namespace {

constexpr const char* kFontDir = "/usr/share/fonts/truetype/dejavu/";  // Debian fonts-dejavu-core
const Rgb kMissingBase{238, 238, 238}, kMissingLine{150, 150, 150};

struct SurfaceDeleter {
  void operator()(cairo_surface_t* s) const { cairo_surface_destroy(s); }
};
struct ContextDeleter {
  void operator()(cairo_t* c) const { cairo_destroy(c); }
};
using SurfacePtr = std::unique_ptr<cairo_surface_t, SurfaceDeleter>;
using CairoPtr = std::unique_ptr<cairo_t, ContextDeleter>;

// The two faces of DejaVu Sans, loaded once per process and kept for its lifetime (cairo holds
// references to the FreeType faces; FreeType is released after the cairo faces at exit).
class Fonts {
 public:
  static const Fonts& instance() {
    static const Fonts fonts;
    return fonts;
  }
  cairo_font_face_t* face(bool bold) const { return bold ? bold_ : book_; }
  ~Fonts() {
    cairo_font_face_destroy(book_);
    cairo_font_face_destroy(bold_);
    FT_Done_Face(book_ft_);
    FT_Done_Face(bold_ft_);
    FT_Done_FreeType(library_);
  }

 private:
  Fonts() {
    if (FT_Init_FreeType(&library_) != 0) throw Error("FreeType: cannot initialise the library");
    book_ft_ = load(font_path(false));
    bold_ft_ = load(font_path(true));
    book_ = cairo_ft_font_face_create_for_ft_face(book_ft_, 0);
    bold_ = cairo_ft_font_face_create_for_ft_face(bold_ft_, 0);
    if (cairo_font_face_status(book_) != CAIRO_STATUS_SUCCESS || cairo_font_face_status(bold_) != CAIRO_STATUS_SUCCESS)
      throw Error("cairo: cannot use the DejaVu Sans font faces");
  }
  FT_Face load(const std::string& path) {
    FT_Face face = nullptr;
    if (FT_New_Face(library_, path.c_str(), 0, &face) != 0) throw Error(path + ": FreeType cannot read this font");
    return face;
  }
  FT_Library library_ = nullptr;
  FT_Face book_ft_ = nullptr, bold_ft_ = nullptr;
  cairo_font_face_t *book_ = nullptr, *bold_ = nullptr;
};

void set_colour(cairo_t* cr, Rgb c, double alpha = 1.0) {
  cairo_set_source_rgba(cr, c[0] / 255.0, c[1] / 255.0, c[2] / 255.0, alpha);
}

void set_font(cairo_t* cr, double size_px, bool bold) {
  cairo_set_font_face(cr, Fonts::instance().face(bold));
  cairo_set_font_size(cr, size_px);
}

}  // namespace

std::string font_path(bool bold) {
  std::string path = std::string(kFontDir) + (bold ? "DejaVuSans-Bold.ttf" : "DejaVuSans.ttf");
  if (!std::filesystem::exists(path))
    throw Error(path + ": font missing (Debian package fonts-dejavu-core; scripts/setup.sh installs it)");
  return path;
}

Rgb missing_pattern(int x, int y) { return (x + y) % 6 == 0 ? kMissingLine : kMissingBase; }

struct Canvas::Impl {
  SurfacePtr surface;
  CairoPtr cr;
};

Canvas::Canvas(int width, int height, Rgb background) : impl_(std::make_unique<Impl>()), width_(width), height_(height) {
  if (width <= 0 || height <= 0 || width > 30000 || height > 30000)
    throw Error("quicklook: image size " + std::to_string(width) + " x " + std::to_string(height) + " px out of range");
  impl_->surface.reset(cairo_image_surface_create(CAIRO_FORMAT_RGB24, width, height));
  if (cairo_surface_status(impl_->surface.get()) != CAIRO_STATUS_SUCCESS) throw Error("cairo: cannot create an image surface");
  impl_->cr.reset(cairo_create(impl_->surface.get()));
  if (cairo_status(impl_->cr.get()) != CAIRO_STATUS_SUCCESS) throw Error("cairo: cannot create a drawing context");
  fill_rect(0, 0, width, height, background);
}

Canvas::~Canvas() = default;

TextExtent Canvas::measure(const std::string& text, double size_px, bool bold) {
  static std::mutex mutex;  // one scratch context for measuring
  std::lock_guard<std::mutex> lock(mutex);
  static SurfacePtr surface(cairo_image_surface_create(CAIRO_FORMAT_RGB24, 1, 1));
  static CairoPtr cr(cairo_create(surface.get()));
  set_font(cr.get(), size_px, bold);
  cairo_font_extents_t font;
  cairo_font_extents(cr.get(), &font);
  cairo_text_extents_t extents;
  cairo_text_extents(cr.get(), text.c_str(), &extents);
  return {extents.x_advance, font.ascent, font.descent};
}

void Canvas::text(double x, double baseline_y, const std::string& text, double size_px, Rgb colour, bool bold) {
  cairo_t* cr = impl_->cr.get();
  set_font(cr, size_px, bold);
  set_colour(cr, colour);
  cairo_move_to(cr, x, baseline_y);
  cairo_show_text(cr, text.c_str());
  cairo_new_path(cr);
}

void Canvas::polyline(const std::vector<Point>& points, Rgb colour, double line_width, double alpha, double dash) {
  if (points.size() < 2) return;
  cairo_t* cr = impl_->cr.get();
  cairo_save(cr);
  cairo_set_antialias(cr, CAIRO_ANTIALIAS_DEFAULT);
  cairo_set_line_width(cr, line_width);
  cairo_set_line_join(cr, CAIRO_LINE_JOIN_ROUND);
  cairo_set_line_cap(cr, CAIRO_LINE_CAP_ROUND);
  if (dash > 0) {
    double pattern[2] = {dash, dash};
    cairo_set_dash(cr, pattern, 2, 0);
  }
  set_colour(cr, colour, alpha);
  cairo_move_to(cr, points[0][0], points[0][1]);
  for (std::size_t k = 1; k < points.size(); ++k) cairo_line_to(cr, points[k][0], points[k][1]);
  cairo_stroke(cr);
  cairo_restore(cr);
}

void Canvas::polygon(const std::vector<Point>& points, Rgb fill, const Rgb* outline, double line_width) {
  if (points.size() < 3) return;
  cairo_t* cr = impl_->cr.get();
  cairo_move_to(cr, points[0][0], points[0][1]);
  for (std::size_t k = 1; k < points.size(); ++k) cairo_line_to(cr, points[k][0], points[k][1]);
  cairo_close_path(cr);
  set_colour(cr, fill);
  if (outline) {
    cairo_fill_preserve(cr);
    cairo_set_line_width(cr, line_width);
    cairo_set_line_join(cr, CAIRO_LINE_JOIN_MITER);
    set_colour(cr, *outline);
    cairo_stroke(cr);
  } else {
    cairo_fill(cr);
  }
}

void Canvas::fill_rect(double x, double y, double w, double h, Rgb colour) {
  cairo_t* cr = impl_->cr.get();
  cairo_rectangle(cr, x, y, w, h);
  set_colour(cr, colour);
  cairo_fill(cr);
}

void Canvas::frame(double x, double y, double w, double h, Rgb colour, double line_width) {
  cairo_t* cr = impl_->cr.get();
  cairo_save(cr);
  cairo_set_antialias(cr, CAIRO_ANTIALIAS_NONE);
  cairo_set_line_width(cr, line_width);
  cairo_rectangle(cr, x - 0.5 * line_width, y - 0.5 * line_width, w + line_width, h + line_width);
  set_colour(cr, colour);
  cairo_stroke(cr);
  cairo_restore(cr);
}

void Canvas::hatch(double x, double y, double w, double h) {
  int x0 = static_cast<int>(x), y0 = static_cast<int>(y);
  RgbImage patch(static_cast<int>(w), static_cast<int>(h), kMissingBase);
  for (int py = 0; py < patch.height; ++py)
    for (int px = 0; px < patch.width; ++px) patch.set(px, py, missing_pattern(x0 + px, y0 + py));
  blit(patch, x0, y0);
}

void Canvas::blit(const RgbImage& image, int x, int y) {
  cairo_surface_t* s = impl_->surface.get();
  cairo_surface_flush(s);
  unsigned char* data = cairo_image_surface_get_data(s);
  int stride = cairo_image_surface_get_stride(s);
  for (int row = 0; row < image.height; ++row) {
    int yy = y + row;
    if (yy < 0 || yy >= height_) continue;
    auto* line = reinterpret_cast<std::uint32_t*>(data + static_cast<std::ptrdiff_t>(yy) * stride);
    for (int col = 0; col < image.width; ++col) {
      int xx = x + col;
      if (xx < 0 || xx >= width_) continue;
      Rgb c = image.get(col, row);
      line[xx] = (static_cast<std::uint32_t>(c[0]) << 16) | (static_cast<std::uint32_t>(c[1]) << 8) | c[2];
    }
  }
  cairo_surface_mark_dirty(s);
}

void Canvas::clip(double x, double y, double w, double h) {
  cairo_t* cr = impl_->cr.get();
  cairo_reset_clip(cr);
  cairo_rectangle(cr, x, y, w, h);
  cairo_clip(cr);
}

void Canvas::reset_clip() { cairo_reset_clip(impl_->cr.get()); }

RgbImage Canvas::pixels() {
  cairo_surface_t* s = impl_->surface.get();
  cairo_surface_flush(s);
  const unsigned char* data = cairo_image_surface_get_data(s);
  int stride = cairo_image_surface_get_stride(s);
  RgbImage image(width_, height_, {255, 255, 255});
  for (int y = 0; y < height_; ++y) {
    const auto* line = reinterpret_cast<const std::uint32_t*>(data + static_cast<std::ptrdiff_t>(y) * stride);
    for (int x = 0; x < width_; ++x)
      image.set(x, y, {static_cast<std::uint8_t>(line[x] >> 16), static_cast<std::uint8_t>(line[x] >> 8),
                       static_cast<std::uint8_t>(line[x])});
  }
  return image;
}

}  // namespace latentlift::maps::detail
