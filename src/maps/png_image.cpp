// PNG files through libpng. libpng reports errors by longjmp: each call that can fail runs in a
// function holding only trivially destructible locals, and C++ exceptions are thrown afterwards.
#include "maps/png_image.hpp"

#include <png.h>

#include <cerrno>
#include <csetjmp>
#include <cstdio>
#include <cstring>
#include <memory>

#include "latentlift/errors.hpp"

namespace latentlift::maps::detail {

RgbImage::RgbImage(int w, int h, Rgb fill) : width(w), height(h), pixels(static_cast<std::size_t>(w) * h * 3) {
  for (std::size_t i = 0; i < pixels.size(); i += 3) {
    pixels[i] = fill[0];
    pixels[i + 1] = fill[1];
    pixels[i + 2] = fill[2];
  }
}

void RgbImage::fill_rect(int x, int y, int w, int h, Rgb c) {
  for (int j = y; j < y + h; ++j)
    for (int i = x; i < x + w; ++i) set(i, j, c);
}

void RgbImage::frame(int x, int y, int w, int h, Rgb c) {
  for (int i = x; i < x + w; ++i) {
    set(i, y, c);
    set(i, y + h - 1, c);
  }
  for (int j = y; j < y + h; ++j) {
    set(x, j, c);
    set(x + w - 1, j, c);
  }
}

namespace {

struct FileCloser {
  void operator()(std::FILE* f) const { std::fclose(f); }
};
using FilePtr = std::unique_ptr<std::FILE, FileCloser>;

// libpng's default handlers print to stderr ("libpng error: Write Error"); the failure is
// reported once by the caller (one line), so errors only jump back and warnings are dropped.
extern "C" void png_fail_quietly(png_structp png, png_const_charp) { png_longjmp(png, 1); }
extern "C" void png_warn_quietly(png_structp, png_const_charp) {}

// Owns a png_struct/png_info pair for writing.
struct PngWriter {
  png_structp png = nullptr;
  png_infop info = nullptr;
  PngWriter() {
    png = png_create_write_struct(PNG_LIBPNG_VER_STRING, nullptr, png_fail_quietly, png_warn_quietly);
    if (png) info = png_create_info_struct(png);
  }
  ~PngWriter() { png_destroy_write_struct(&png, &info); }
};

struct PngReader {
  png_structp png = nullptr;
  png_infop info = nullptr;
  PngReader() {
    png = png_create_read_struct(PNG_LIBPNG_VER_STRING, nullptr, nullptr, nullptr);
    if (png) info = png_create_info_struct(png);
  }
  ~PngReader() { png_destroy_read_struct(&png, &info, nullptr); }
};

// Returns false when libpng failed (longjmp target); only trivially destructible locals here.
bool write_rows(png_structp png, png_infop info, std::FILE* file, const RgbImage* image, png_bytep* rows) {
  if (setjmp(png_jmpbuf(png))) return false;
  png_init_io(png, file);
  png_set_IHDR(png, info, static_cast<png_uint_32>(image->width), static_cast<png_uint_32>(image->height), 8,
               PNG_COLOR_TYPE_RGB, PNG_INTERLACE_NONE, PNG_COMPRESSION_TYPE_DEFAULT, PNG_FILTER_TYPE_DEFAULT);
  png_write_info(png, info);
  png_write_image(png, rows);
  png_write_end(png, nullptr);
  return true;
}

bool read_header(png_structp png, png_infop info, std::FILE* file, png_uint_32* width, png_uint_32* height) {
  if (setjmp(png_jmpbuf(png))) return false;
  png_init_io(png, file);
  png_read_info(png, info);
  png_set_expand(png);            // palette -> RGB, grey < 8 bit -> 8 bit, tRNS -> alpha
  png_set_strip_16(png);
  png_set_strip_alpha(png);
  png_set_gray_to_rgb(png);
  png_read_update_info(png, info);
  *width = png_get_image_width(png, info);
  *height = png_get_image_height(png, info);
  return png_get_rowbytes(png, info) == *width * 3;
}

bool read_rows(png_structp png, png_infop info, png_bytep* rows) {
  if (setjmp(png_jmpbuf(png))) return false;
  png_read_image(png, rows);
  png_read_end(png, info);
  return true;
}

}  // namespace

void write_png(const std::string& path, const RgbImage& image, const std::string& reported_as) {
  const std::string& name = reported_as.empty() ? path : reported_as;
  FilePtr file(std::fopen(path.c_str(), "wb"));
  if (!file) throw Error(name + ": cannot open for writing (" + std::strerror(errno) + ")");
  PngWriter writer;
  if (!writer.png || !writer.info) throw Error("libpng: cannot create a writer");
  std::vector<png_bytep> rows(static_cast<std::size_t>(image.height));
  for (int y = 0; y < image.height; ++y)
    rows[y] = const_cast<png_bytep>(&image.pixels[static_cast<std::size_t>(y) * image.width * 3]);
  errno = 0;
  if (!write_rows(writer.png, writer.info, file.get(), &image, rows.data()))
    throw Error(name + ": cannot write the PNG" + (errno ? std::string(" (") + std::strerror(errno) + ")" : ""));
  // A full disk often shows only when the buffered rest is written: check the flush and the close.
  if (std::fflush(file.get()) != 0) throw Error(name + ": cannot write the PNG (" + std::strerror(errno) + ")");
  if (std::fclose(file.release()) != 0) throw Error(name + ": cannot write the PNG (" + std::strerror(errno) + ")");
}

RgbImage read_png(const std::string& path) {
  FilePtr file(std::fopen(path.c_str(), "rb"));
  if (!file) throw Error(path + ": cannot open");
  PngReader reader;
  if (!reader.png || !reader.info) throw Error("libpng: cannot create a reader");
  png_uint_32 width = 0, height = 0;
  if (!read_header(reader.png, reader.info, file.get(), &width, &height)) throw Error(path + ": not a PNG libpng can read");
  RgbImage image(static_cast<int>(width), static_cast<int>(height), {0, 0, 0});
  std::vector<png_bytep> rows(height);
  for (png_uint_32 y = 0; y < height; ++y) rows[y] = &image.pixels[static_cast<std::size_t>(y) * width * 3];
  if (!read_rows(reader.png, reader.info, rows.data())) throw Error(path + ": corrupt PNG");
  return image;
}

}  // namespace latentlift::maps::detail
