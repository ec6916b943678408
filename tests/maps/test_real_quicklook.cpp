// Quicklook of a real analysis: NCEP's GFS 2.5 degree forecast valid 2011-01-15 12 UTC (the shared
// real-data folder; NCEP GFS output, NOAA/NWS/NCEP, public domain), analysed with the defaults. The
// picture is the README's: build/test-scratch/maps_real_gfs/gfs_mu_lift_to_lfc.png.
#include <gtest/gtest.h>

#include <cmath>
#include <filesystem>
#include <regex>
#include <string>

#include "maps/png_image.hpp"
#include "support/test_support.hpp"

namespace latentlift::test {
namespace {

TEST(RealGfsQuicklook, LiftToLfcShowsCoastlinesAndNotApplicableColumns) {
  std::string dir = real_data_dir() + "/ncep-nwp-pressure-levels/derived-netcdf/";
  std::string pl = dir + "gfs_2p5deg_20110110_12z_f120_pl_t_gh_r.nc", sfc = dir + "gfs_2p5deg_20110110_12z_f120_sfc_sp_orog_cape_cin.nc";
  if (!std::filesystem::exists(pl)) GTEST_SKIP() << "shared real-data folder absent: " << dir;
  std::string out = scratch_dir("maps_real_gfs");
  auto analysis = run_command(binary() + " analyze " + pl + " " + sfc + " -o " + out + "/gfs.nc --overwrite --quiet");
  ASSERT_EQ(analysis.exit_code, 0) << analysis.output;
  std::string png = out + "/gfs_mu_lift_to_lfc.png";
  auto r = run_command(binary() + " quicklook " + out + "/gfs.nc --field mu_lift_to_lfc -o " + png + " --overwrite");
  ASSERT_EQ(r.exit_code, 0) << r.output;

  // Most of the winter globe has no LFC: those columns are "not applicable", not missing.
  std::smatch m;
  ASSERT_TRUE(std::regex_search(r.output, m, std::regex(R"(missing cells (\d+), not applicable cells (\d+))"))) << r.output;
  EXPECT_GT(std::stoul(m[2]), 144u * 73u / 3) << r.output;
  EXPECT_LT(std::stoul(m[1]), 144u * 73u / 20) << r.output;
  EXPECT_NE(r.output.find("GSHHG 2.3.7 low resolution"), std::string::npos) << r.output;

  // The coastline passes within one pixel of Cape Agulhas, 34 50 S 20 00 E (IHO Special Publication
  // 23, 1953): a pixel of the coastline's ink (22, 22, 26), not a colour of the scale, lies there.
  ASSERT_TRUE(std::regex_search(r.output, m, std::regex(R"(map at \((\d+), (\d+)\), \d+ x \d+ px, (\d+) px per cell)")));
  int map_x = std::stoi(m[1]), map_y = std::stoi(m[2]), s = std::stoi(m[3]);
  // the grid: 0..357.5 E, 90..-90 N at 2.5 degrees, outer edges at -1.25 E and 91.25 N
  double px = map_x + (20.0 + 1.25) / 2.5 * s, py = map_y + (91.25 - (-(34 + 50 / 60.0))) / 2.5 * s;
  auto image = maps::detail::read_png(png);
  bool coast = false;
  for (int y = static_cast<int>(std::lround(py)) - 1; y <= std::lround(py) + 1; ++y)
    for (int x = static_cast<int>(std::lround(px)) - 1; x <= std::lround(px) + 1; ++x) {
      auto c = image.get(x, y);
      coast = coast || std::hypot(c[0] - 22.0, c[1] - 22.0, c[2] - 26.0) < 40.0;
    }
  EXPECT_TRUE(coast) << "no coastline ink within a pixel of Cape Agulhas at " << px << ", " << py;
}

}  // namespace
}  // namespace latentlift::test
