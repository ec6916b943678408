// Quicklooks of real analyses: NCEP's GFS 2.5 degree forecast valid 2011-01-15 12 UTC and Eta 80 km
// forecast valid 2004-12-09 12 UTC (the shared real-data folder; NCEP output, NOAA/NWS/NCEP, public
// domain), analysed with the defaults. The GFS picture is the README's:
// build/test-scratch/maps_real_gfs/gfs_mu_lift_to_lfc.png.
#include <gtest/gtest.h>

#include <cmath>
#include <filesystem>
#include <regex>
#include <sstream>
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


TEST(RealEtaQuicklook, CoastlineOnTheModelsLambertGridPassesThroughCapes) {
  // NCEP's Eta 80 km forecast valid 2004-12-09 12 UTC on its Lambert conformal grid 211 (GRIB2, the
  // shared real-data folder; public domain). The grid's CRS as GDAL reads it from the analysis
  // (gdalsrsinfo); the capes' x/y from PROJ's cs2cs. Cape Hatteras 35 13 N 75 32 W (from memory,
  // commonly published gazetteer value); Cape Catoche 21 35 N 87 05 W, the Gulf of Mexico's limit in
  // IHO Special Publication 23 (1953) (from memory).
  std::string grib = real_data_dir() + "/ncep-nwp-pressure-levels/eta_grid211_80km_20041208_12z_f024.grib2";
  if (!std::filesystem::exists(grib)) GTEST_SKIP() << "shared real-data folder absent: " << grib;
  std::string out = scratch_dir("maps_real_eta");
  auto analysis = run_command(binary() + " analyze " + grib + " -o " + out + "/eta.nc --overwrite --quiet");
  ASSERT_EQ(analysis.exit_code, 0) << analysis.output;
  std::string png = out + "/eta_mu_cape.png";
  auto r = run_command(binary() + " quicklook " + out + "/eta.nc --field mu_cape -o " + png + " --overwrite");
  ASSERT_EQ(r.exit_code, 0) << r.output;
  std::smatch m;
  ASSERT_TRUE(std::regex_search(r.output, m, std::regex(R"(map at \((\d+), (\d+)\), \d+ x \d+ px, (\d+) px per cell)")));
  int map_x = std::stoi(m[1]), map_y = std::stoi(m[2]), s = std::stoi(m[3]);
  ASSERT_TRUE(std::regex_search(r.output, m, std::regex(R"(west (\S+) north (\S+), cell (\S+) x (\S+))")));
  double west = std::stod(m[1]), north = std::stod(m[2]), dx = std::stod(m[3]), dy = std::stod(m[4]);
  auto crs = run_command("gdalsrsinfo -o proj4 NETCDF:" + out + "/eta.nc:mu_cape | grep proj");
  ASSERT_NE(crs.output.find("+proj=lcc"), std::string::npos) << crs.output;
  std::string proj = crs.output.substr(0, crs.output.find('\n'));
  auto xy = run_command("printf -- '-75.533 35.217\\n-87.083 21.583\\n' | cs2cs -f %.3f +proj=longlat +R=6371229 +no_defs +to " + proj);
  std::istringstream in(xy.output);
  auto image = maps::detail::read_png(png);
  for (int k = 0; k < 2; ++k) {
    double x = 0, y = 0, z = 0;
    ASSERT_TRUE(static_cast<bool>(in >> x >> y >> z)) << xy.output;
    double px = map_x + (x - west) / dx * s, py = map_y + (north - y) / dy * s;
    bool coast = false;
    for (int yy = static_cast<int>(std::lround(py)) - 1; yy <= std::lround(py) + 1; ++yy)
      for (int xx = static_cast<int>(std::lround(px)) - 1; xx <= std::lround(px) + 1; ++xx) {
        auto c = image.get(xx, yy);
        coast = coast || std::hypot(c[0] - 22.0, c[1] - 22.0, c[2] - 26.0) < 40.0;
      }
    EXPECT_TRUE(coast) << "no coastline ink within a pixel of cape " << k << " at " << px << ", " << py;
  }
}

}  // namespace
}  // namespace latentlift::test
