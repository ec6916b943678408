// Internal: an 8-bit RGB image with libpng reading and writing (RAII over png_struct/png_info).
#pragma once

#include <array>
#include <cstdint>
#include <string>
#include <vector>

namespace latentlift::maps::detail {

using Rgb = std::array<std::uint8_t, 3>;

struct RgbImage {
  int width = 0, height = 0;
  std::vector<std::uint8_t> pixels;  // row-major, 3 bytes per pixel, top row first
  RgbImage() = default;
  RgbImage(int w, int h, Rgb fill);
  void set(int x, int y, Rgb c) {
    if (x < 0 || y < 0 || x >= width || y >= height) return;
    std::uint8_t* p = &pixels[(static_cast<std::size_t>(y) * width + x) * 3];
    p[0] = c[0]; p[1] = c[1]; p[2] = c[2];
  }
  Rgb get(int x, int y) const {
    const std::uint8_t* p = &pixels[(static_cast<std::size_t>(y) * width + x) * 3];
    return {p[0], p[1], p[2]};
  }
  void fill_rect(int x, int y, int w, int h, Rgb c);
  void frame(int x, int y, int w, int h, Rgb c);  // 1-pixel outline
};

/// Writes an 8-bit RGB PNG; Error on failure, naming reported_as when given (the user's target
/// when path is its temporary file).
void write_png(const std::string& path, const RgbImage& image, const std::string& reported_as = "");
/// Reads any PNG as 8-bit RGB (alpha dropped, palettes and grey expanded); Error on failure.
RgbImage read_png(const std::string& path);

}  // namespace latentlift::maps::detail
