// latentlift quicklook: the PNG decodes (libpng), has the stated size, its colours map back to the
// field, classes use their legend colours, and the world file places the map.
#include <gtest/gtest.h>

#include <cmath>
#include <filesystem>
#include <fstream>
#include <regex>
#include <string>

#include "maps/colour_scale.hpp"
#include "io/netcdf_file.hpp"
#include "maps/png_image.hpp"
#include "support/grid_test_helpers.hpp"

namespace latentlift::test {
namespace {

namespace fs = std::filesystem;
using io::detail::NcFile;
using maps::detail::Rgb;

struct Drawn {
  CommandResult result;
  int width = 0, height = 0;
  double low = 0, high = 0, step = 0;
  int bins = 0;
};

Drawn quicklook(const std::string& input, const std::string& png, const std::string& options) {
  Drawn d;
  d.result = run_command(binary() + " quicklook " + input + " -o " + png + " " + options);
  EXPECT_EQ(d.result.exit_code, 0) << d.result.output;
  std::smatch m;
  if (std::regex_search(d.result.output, m, std::regex(R"(\((\d+) x (\d+) px\))"))) {
    d.width = std::stoi(m[1]);
    d.height = std::stoi(m[2]);
  }
  if (std::regex_search(d.result.output, m, std::regex(R"(colour steps: (\d+) from (\S+) to (\S+) \(step (\S+)\))"))) {
    d.bins = std::stoi(m[1]);
    d.low = std::stod(m[2]);
    d.high = std::stod(m[3]);
    d.step = std::stod(m[4]);
  }
  return d;
}

struct WorldFile {
  double a, d, b, e, c, f;  // ESRI order: x size, rotation, rotation, y size, x and y of the top-left pixel centre
  // Pixel (column, row) whose centre is nearest to map coordinates (x, y).
  std::pair<int, int> pixel(double x, double y) const {
    return {static_cast<int>(std::lround((x - c) / a)), static_cast<int>(std::lround((y - f) / e))};
  }
};

WorldFile read_world_file(const std::string& path) {
  std::ifstream in(path);
  WorldFile w{};
  in >> w.a >> w.d >> w.b >> w.e >> w.c >> w.f;
  EXPECT_TRUE(in) << path;
  return w;
}

struct Grid {
  std::vector<double> x, y, values;
  double fill;
};

Grid read_grid(const std::string& path, const std::string& field, const std::string& xname, const std::string& yname) {
  NcFile file = NcFile::open_read(path);
  Grid g;
  g.x = io::detail::read_doubles(file, *io::detail::find_variable(file, xname));
  g.y = io::detail::read_doubles(file, *io::detail::find_variable(file, yname));
  auto var = *io::detail::find_variable(file, field);
  g.values = io::detail::read_doubles(file, var);
  g.fill = io::detail::number_attribute(file, var.id, "_FillValue")->front();
  return g;
}

TEST(Quicklook, PngDecodesWithTheStatedSize) {
  std::string dir = scratch_dir("gis_quicklook_size");
  std::string in = make_cf_grid(dir, "lambert_conformal_conic");
  Drawn d = quicklook(in, dir + "/map.png", "--field mu_cape");
  maps::detail::RgbImage image = maps::detail::read_png(dir + "/map.png");
  EXPECT_GT(d.width, 0);
  EXPECT_EQ(image.width, d.width);
  EXPECT_EQ(image.height, d.height);
}

TEST(Quicklook, ColoursMapBackToTheFieldWithinOneColourStep) {
  std::string dir = scratch_dir("gis_quicklook_colours");
  std::string in = make_cf_grid(dir, "none");  // regular lat/lon, EPSG:4326
  Drawn d = quicklook(in, dir + "/map.png", "--field mu_cape --time 1");
  ASSERT_GT(d.bins, 1) << d.result.output;
  auto image = maps::detail::read_png(dir + "/map.png");
  WorldFile world = read_world_file(dir + "/map.pgw");
  Grid g = read_grid(in, "mu_cape", "lon", "lat");
  std::vector<Rgb> steps = maps::detail::sequential_steps(d.bins);
  std::size_t plane = g.x.size() * g.y.size();
  for (std::size_t j = 0; j < g.y.size(); ++j)
    for (std::size_t i = 0; i < g.x.size(); ++i) {
      double v = g.values[plane + j * g.x.size() + i];  // time index 1
      auto [col, row] = world.pixel(g.x[i], g.y[j]);
      Rgb colour = image.get(col, row);
      auto k = std::find(steps.begin(), steps.end(), colour) - steps.begin();
      ASSERT_LT(k, static_cast<long>(steps.size())) << "pixel colour not on the scale at cell " << i << "," << j;
      double centre = d.low + (k + 0.5) * d.step;
      EXPECT_LE(std::fabs(v - centre), d.step) << "cell " << i << "," << j;
    }
}

TEST(Quicklook, MissingCellsAreGreyAndOffTheScale) {
  std::string dir = scratch_dir("gis_quicklook_missing");
  std::string in = make_cf_grid(dir, "none");
  Drawn d = quicklook(in, dir + "/map.png", "--field latent_layer_depth");
  auto image = maps::detail::read_png(dir + "/map.png");
  WorldFile world = read_world_file(dir + "/map.pgw");
  Grid g = read_grid(in, "latent_layer_depth", "lon", "lat");
  std::vector<Rgb> steps = maps::detail::sequential_steps(d.bins);
  for (std::size_t j = 0; j < 4; ++j)
    for (std::size_t i = 0; i < 4; ++i) {
      bool missing = g.values[j * g.x.size() + i] == g.fill;
      EXPECT_EQ(missing, i < 2 && j < 2);  // as make_cf_grid.py writes it
      auto [col, row] = world.pixel(g.x[i], g.y[j]);
      Rgb colour = image.get(col, row);
      bool on_scale = std::find(steps.begin(), steps.end(), colour) != steps.end();
      EXPECT_EQ(on_scale, !missing) << i << "," << j;
      if (missing) {
        EXPECT_TRUE(colour[0] == colour[1] && colour[1] == colour[2]) << "missing is not grey";
      }
    }
}

TEST(Quicklook, ClassFieldUsesTheCategoricalColoursOfItsFlagValues) {
  std::string dir = scratch_dir("gis_quicklook_classes");
  std::string in = make_cf_grid(dir, "none");
  Drawn d = quicklook(in, dir + "/map.png", "--field latent_class");
  EXPECT_EQ(d.bins, 0) << "a class field has a legend, not a colour bar";
  auto image = maps::detail::read_png(dir + "/map.png");
  WorldFile world = read_world_file(dir + "/map.pgw");
  Grid g = read_grid(in, "latent_class", "lon", "lat");
  for (std::size_t j = 0; j < g.y.size(); ++j)
    for (std::size_t i = 0; i < g.x.size(); ++i) {
      int value = static_cast<int>(g.values[j * g.x.size() + i]);  // flag_values 0, 1, 2: index = value
      auto [col, row] = world.pixel(g.x[i], g.y[j]);
      EXPECT_EQ(image.get(col, row), maps::detail::category_colour(value)) << i << "," << j;
    }
}

TEST(Quicklook, GdalReadsThePngGeoreferencedInTheGridCrs) {
  std::string dir = scratch_dir("gis_quicklook_gdal");
  std::string in = make_cf_grid(dir, "lambert_conformal_conic");
  quicklook(in, dir + "/map.png", "--field mu_cape");
  auto info = run_command("gdalinfo " + dir + "/map.png");
  EXPECT_NE(info.output.find("Lambert Conic Conformal (2SP)"), std::string::npos) << info.output;
  auto prj = run_command("gdalsrsinfo -o proj4 " + dir + "/map.prj");
  EXPECT_NE(prj.output.find("+proj=lcc"), std::string::npos) << prj.output;
  // The grid's x/y (metres) at each cell centre fall in the middle of that cell's block of pixels.
  Grid g = read_grid(in, "mu_cape", "x", "y");
  WorldFile world = read_world_file(dir + "/map.pgw");
  double cell_pixels = (g.x[1] - g.x[0]) / world.a;
  EXPECT_NEAR(cell_pixels, std::round(cell_pixels), 1e-9);
  auto [c0, r0] = world.pixel(g.x[0], g.y.back());
  auto [c1, r1] = world.pixel(g.x[1], g.y[g.y.size() - 2]);
  EXPECT_EQ(c1 - c0, static_cast<int>(std::round(cell_pixels)));
  EXPECT_EQ(r1 - r0, static_cast<int>(std::round(cell_pixels)));
}

TEST(Quicklook, TitleGivesTheValidTime) {
  // time = 6 hours since 2031-07-14 00:00:00 at index 1 (make_cf_grid.py).
  std::string dir = scratch_dir("gis_quicklook_time");
  std::string in = make_cf_grid(dir, "mercator");
  Drawn d = quicklook(in, dir + "/map.png", "--field mu_cape --time 1");
  EXPECT_NE(d.result.output.find("valid 2031-07-14 06:00 UTC"), std::string::npos) << d.result.output;
}

TEST(Quicklook, UnstructuredGridIsDrawnOnALatLonGrid) {
  std::string dir = scratch_dir("gis_quicklook_unstructured");
  std::string in = make_cf_grid(dir, "unstructured");
  Drawn d = quicklook(in, dir + "/map.png", "--field mu_cape");
  EXPECT_TRUE(fs::exists(dir + "/map.pgw"));
  auto info = run_command("gdalinfo " + dir + "/map.png");
  EXPECT_NE(info.output.find("WGS 84"), std::string::npos) << info.output;
}

TEST(Quicklook, TimeIndexBeyondTheFileIsAUsageError) {
  std::string dir = scratch_dir("gis_quicklook_bad_time");
  std::string in = make_cf_grid(dir, "none");
  auto result = run_command(binary() + " quicklook " + in + " --field mu_cape --time 5 -o " + dir + "/m.png");
  EXPECT_EQ(result.exit_code, 2) << result.output;
  EXPECT_FALSE(fs::exists(dir + "/m.png"));
}

TEST(Quicklook, UnknownFieldIsAnInputError) {
  std::string dir = scratch_dir("gis_quicklook_bad_field");
  std::string in = make_cf_grid(dir, "none");
  auto result = run_command(binary() + " quicklook " + in + " --field no_such_field -o " + dir + "/m.png");
  EXPECT_EQ(result.exit_code, 2) << result.output;
  EXPECT_NE(result.output.find("no_such_field"), std::string::npos) << result.output;
}

TEST(ColourScale, LightnessRisesFromDarkToLight) {
  // The design: CIELAB L* from 20 to 92, strictly rising (a sequential scale reads dark = low).
  double previous = -1;
  for (int k = 0; k <= 100; ++k) {
    double lightness = maps::detail::srgb_to_lab(maps::detail::sequential_colour(k / 100.0))[0];
    EXPECT_GT(lightness, previous) << k;
    previous = lightness;
  }
  EXPECT_NEAR(maps::detail::srgb_to_lab(maps::detail::sequential_colour(0.0))[0], 20.0, 1.0);
  EXPECT_NEAR(maps::detail::srgb_to_lab(maps::detail::sequential_colour(1.0))[0], 92.0, 1.0);
}

TEST(ColourScale, AdjacentStepsDifferByEqualPerceivedAmounts) {
  // CIE 1976 colour difference between neighbouring bins of a 16-step bar: equal up to rounding
  // (8-bit sRGB rounding moves each colour by up to about 0.5 units, so a difference by up to 1).
  std::vector<Rgb> steps = maps::detail::sequential_steps(16);
  double smallest = 1e9, largest = 0;
  for (std::size_t k = 1; k < steps.size(); ++k) {
    auto a = maps::detail::srgb_to_lab(steps[k - 1]), b = maps::detail::srgb_to_lab(steps[k]);
    double delta_e = std::sqrt((a[0] - b[0]) * (a[0] - b[0]) + (a[1] - b[1]) * (a[1] - b[1]) + (a[2] - b[2]) * (a[2] - b[2]));
    smallest = std::min(smallest, delta_e);
    largest = std::max(largest, delta_e);
  }
  EXPECT_GT(smallest, 4.0);
  EXPECT_LE(largest - smallest, 2.0);
}

TEST(ColourScale, NiceBinsCoverTheRangeWithRoundEdges) {
  auto bins = maps::detail::nice_bins(503.2, 1496.7);
  EXPECT_LE(bins.low, 503.2);
  EXPECT_GE(bins.high(), 1496.7);
  EXPECT_LE(bins.count, 16);
  EXPECT_DOUBLE_EQ(bins.step, 100.0);
  EXPECT_DOUBLE_EQ(bins.low, 500.0);
}

}  // namespace
}  // namespace latentlift::test
