// The NetCDF writer: CF attributes, grid mapping and coordinates copied, byte flags,
// temporary file renamed only on commit, refusal to overwrite.
#include <gtest/gtest.h>

#include <filesystem>
#include <fstream>

#include "io/nc_builder.hpp"
#include "latentlift/errors.hpp"
#include "latentlift/netcdf_io.hpp"
#include "support/test_support.hpp"

namespace latentlift {
namespace {

namespace fs = std::filesystem;
using test::SmallGrid;

std::string text_att(int ncid, int varid, const char* name) {
  size_t length = 0;
  if (nc_inq_attlen(ncid, varid, name, &length) != NC_NOERR) return "<absent>";
  std::string text(length, '\0');
  nc_get_att_text(ncid, varid, name, text.data());
  return text;
}

class Writer : public ::testing::Test {
 protected:
  void SetUp() override {
    std::vector<test::Var> vars = grid.standard();
    vars.push_back({"crs", NC_INT, {}, {{"grid_mapping_name", "latitude_longitude"}, {"longitude_of_prime_meridian", "", {0.0}, NC_DOUBLE}}, {}});
    for (std::size_t v = 4; v < 7; ++v) vars[v].atts.push_back({"grid_mapping", "crs"});
    test::write_nc(input_path, grid.dims, vars);
  }
  FieldSet some_fields(std::size_t n) {
    FieldSet f;
    f.n_columns = n;
    for (const std::string& name : real_field_names()) f.real[name].assign(n, 1.5f);
    f.real["mu_cape"][0] = std::numeric_limits<float>::quiet_NaN();
    f.byte["latent_class"].assign(n, 2);
    return f;
  }
  SmallGrid grid;
  std::string dir = test::scratch_dir(::testing::UnitTest::GetInstance()->current_test_info()->name());
  std::string input_path = dir + "/in.nc";
  std::string output_path = dir + "/out.nc";
};

TEST_F(Writer, WritesCfAttributesFieldsAndTheInputGrid) {
  InputDataset input({input_path}, {});
  OutputOptions options;
  options.history = "latentlift analyze in.nc -o out.nc";
  options.level_fields = true;
  {
    OutputWriter writer(output_path, input, options);
    for (std::size_t s = 0; s < writer.n_steps(); ++s) writer.write_fields(s, some_fields(12));
    QcCounts qc;
    qc.columns_analysed = 24;
    writer.commit(qc);
  }
  int ncid = -1;
  ASSERT_EQ(nc_open(output_path.c_str(), NC_NOWRITE, &ncid), NC_NOERR);
  EXPECT_EQ(text_att(ncid, NC_GLOBAL, "Conventions"), "CF-1.8");
  EXPECT_EQ(text_att(ncid, NC_GLOBAL, "source"), std::string("latentlift ") + LATENTLIFT_VERSION);
  EXPECT_NE(text_att(ncid, NC_GLOBAL, "history").find("latentlift analyze in.nc -o out.nc"), std::string::npos);
  EXPECT_NE(text_att(ncid, NC_GLOBAL, "input_files").find("in.nc"), std::string::npos);
  long long analysed = 0;
  EXPECT_EQ(nc_get_att_longlong(ncid, NC_GLOBAL, "qc_columns_analysed", &analysed), NC_NOERR);
  EXPECT_EQ(analysed, 24);
  int cape = -1, klass = -1, crs = -1, time = -1, flag = -1;
  ASSERT_EQ(nc_inq_varid(ncid, "mu_cape", &cape), NC_NOERR);
  EXPECT_EQ(text_att(ncid, cape, "units"), "J kg-1");
  EXPECT_EQ(text_att(ncid, cape, "standard_name"), "atmosphere_convective_available_potential_energy");
  EXPECT_EQ(text_att(ncid, cape, "grid_mapping"), "crs");
  int ndims = 0;
  nc_inq_varndims(ncid, cape, &ndims);
  EXPECT_EQ(ndims, 3);  // time, lat, lon
  float values[12];
  size_t start[3] = {1, 0, 0}, count[3] = {1, 3, 4};
  nc_get_vara_float(ncid, cape, start, count, values);
  float fill = 0;
  nc_get_att_float(ncid, cape, "_FillValue", &fill);
  EXPECT_EQ(values[0], fill);  // NaN written as _FillValue
  EXPECT_EQ(values[1], 1.5f);
  ASSERT_EQ(nc_inq_varid(ncid, "latent_class", &klass), NC_NOERR);
  nc_type type = NC_NAT;
  nc_inq_vartype(ncid, klass, &type);
  EXPECT_EQ(type, NC_BYTE);
  EXPECT_EQ(text_att(ncid, klass, "flag_meanings"), "none pseudo_latent real_latent");
  ASSERT_EQ(nc_inq_varid(ncid, "crs", &crs), NC_NOERR);
  EXPECT_EQ(text_att(ncid, crs, "grid_mapping_name"), "latitude_longitude");
  ASSERT_EQ(nc_inq_varid(ncid, "time", &time), NC_NOERR);
  double times[2];
  nc_get_var_double(ncid, time, times);
  EXPECT_EQ(times[1], 6.0);
  ASSERT_EQ(nc_inq_varid(ncid, "stability_class", &flag), NC_NOERR);
  nc_inq_varndims(ncid, flag, &ndims);
  EXPECT_EQ(ndims, 4);  // time, level, lat, lon
  EXPECT_EQ(text_att(ncid, flag, "flag_meanings"),
            "absolutely_stable conditionally_unstable absolutely_unstable neutral_saturated neutral_dry");
  int deflate = 0, shuffle = 0, level = 0;
  nc_inq_var_deflate(ncid, cape, &shuffle, &deflate, &level);
  EXPECT_EQ(deflate, 1);
  size_t chunks[3];
  int storage = 0;
  nc_inq_var_chunking(ncid, cape, &storage, chunks);
  EXPECT_EQ(chunks[1], 3u);  // one chunk is a whole map
  EXPECT_EQ(chunks[2], 4u);
  nc_close(ncid);
}

TEST_F(Writer, WritesATemporaryFileAndRenamesItOnlyOnCommit) {
  InputDataset input({input_path}, {});
  OutputWriter writer(output_path, input, {});
  EXPECT_TRUE(fs::exists(writer.temporary_path()));
  EXPECT_EQ(fs::path(writer.temporary_path()).parent_path(), fs::path(output_path).parent_path());
  EXPECT_FALSE(fs::exists(output_path));
  writer.commit({});
  EXPECT_TRUE(fs::exists(output_path));
  EXPECT_FALSE(fs::exists(writer.temporary_path()));
}

TEST_F(Writer, RemovesTheTemporaryFileWhenNotCommitted) {
  InputDataset input({input_path}, {});
  std::string temporary;
  {
    OutputWriter writer(output_path, input, {});
    temporary = writer.temporary_path();
    writer.write_fields(0, some_fields(12));
  }
  EXPECT_FALSE(fs::exists(temporary));
  EXPECT_FALSE(fs::exists(output_path));
}

TEST_F(Writer, RefusesToOverwriteWithoutTheOverwriteOption) {
  std::ofstream(output_path) << "keep me";
  InputDataset input({input_path}, {});
  EXPECT_THROW(OutputWriter(output_path, input, {}), UsageError);
  EXPECT_EQ(fs::file_size(output_path), 7u);
  OutputOptions options;
  options.overwrite = true;
  OutputWriter writer(output_path, input, options);
  writer.commit({});
  EXPECT_GT(fs::file_size(output_path), 7u);
}

TEST_F(Writer, RefusesToReplaceAnInputFile) {
  InputDataset input({input_path}, {});
  OutputOptions options;
  options.overwrite = true;
  EXPECT_THROW(OutputWriter(input_path, input, options), UsageError);
}

TEST_F(Writer, WritesOnlyTheChosenTimeSteps) {
  InputDataset input({input_path}, {});
  OutputOptions options;
  options.time_indices = {1};
  OutputWriter writer(output_path, input, options);
  EXPECT_EQ(writer.n_steps(), 1u);
  EXPECT_EQ(writer.input_step(0), 1u);
  writer.commit({});
  int ncid = -1, time = -1;
  ASSERT_EQ(nc_open(output_path.c_str(), NC_NOWRITE, &ncid), NC_NOERR);
  nc_inq_varid(ncid, "time", &time);
  double t = 0;
  nc_get_var_double(ncid, time, &t);
  EXPECT_EQ(t, 6.0);
  nc_close(ncid);
}

TEST_F(Writer, GivesLatLonInputWithoutGridMappingTheWgs84GridMapping) {
  test::write_nc(input_path, grid.dims, grid.standard());  // no grid_mapping
  InputDataset input({input_path}, {});
  OutputWriter(output_path, input, {}).commit({});
  int ncid = -1, crs = -1, cape = -1;
  ASSERT_EQ(nc_open(output_path.c_str(), NC_NOWRITE, &ncid), NC_NOERR);
  ASSERT_EQ(nc_inq_varid(ncid, "crs", &crs), NC_NOERR);
  EXPECT_EQ(text_att(ncid, crs, "grid_mapping_name"), "latitude_longitude");  // CF 1.8 Appendix F
  double semi_major = 0;
  nc_get_att_double(ncid, crs, "semi_major_axis", &semi_major);
  EXPECT_EQ(semi_major, 6378137.0);  // WGS 84 ellipsoid (NIMA TR8350.2)
  nc_inq_varid(ncid, "mu_cape", &cape);
  EXPECT_EQ(text_att(ncid, cape, "grid_mapping"), "crs");
  nc_close(ncid);
}

TEST_F(Writer, AddsLatLonToAProjectedGridWithoutThem) {
  test::Dims dims = {{"plev", 3}, {"y", 2}, {"x", 3}};
  std::vector<test::Var> vars = {
      {"plev", NC_DOUBLE, {"plev"}, {{"units", "hPa"}}, {1000, 850, 700}},
      {"x", NC_DOUBLE, {"x"}, {{"units", "m"}, {"standard_name", "projection_x_coordinate"}}, {0, 50000, 100000}},
      {"y", NC_DOUBLE, {"y"}, {{"units", "m"}, {"standard_name", "projection_y_coordinate"}}, {100000, 200000}},
      {"lcc", NC_INT, {}, {{"grid_mapping_name", "lambert_conformal_conic"}, {"standard_parallel", "", {35.0, 47.0}, NC_DOUBLE},
                           {"longitude_of_central_meridian", "", {10.0}, NC_DOUBLE}, {"latitude_of_projection_origin", "", {40.0}, NC_DOUBLE},
                           {"earth_radius", "", {6371229.0}, NC_DOUBLE}}, {}},
      {"t", NC_FLOAT, {"plev", "y", "x"}, {{"units", "K"}, {"standard_name", "air_temperature"}, {"grid_mapping", "lcc"}}, std::vector<double>(18, 280.0)},
      {"q", NC_FLOAT, {"plev", "y", "x"}, {{"units", "1"}, {"standard_name", "specific_humidity"}, {"grid_mapping", "lcc"}}, std::vector<double>(18, 0.004)},
      {"z", NC_FLOAT, {"plev", "y", "x"}, {{"units", "m"}, {"standard_name", "geopotential_height"}, {"grid_mapping", "lcc"}}, std::vector<double>(18, 1000.0)},
  };
  test::write_nc(input_path, dims, vars);
  InputDataset input({input_path}, {});
  OutputWriter(output_path, input, {}).commit({});
  int ncid = -1, lat = -1, cape = -1, mapping = -1;
  ASSERT_EQ(nc_open(output_path.c_str(), NC_NOWRITE, &ncid), NC_NOERR);
  ASSERT_EQ(nc_inq_varid(ncid, "lat", &lat), NC_NOERR);
  double lats[6];
  nc_get_var_double(ncid, lat, lats);
  // x = 100 km, y = 200 km by PROJ's cs2cs (+proj=lcc +lat_1=35 +lat_2=47 +lat_0=40 +lon_0=10 +R=6371229): 41.802120 N
  EXPECT_NEAR(lats[5], 41.802120, 1e-5);
  nc_inq_varid(ncid, "mu_cape", &cape);
  EXPECT_EQ(text_att(ncid, cape, "coordinates"), "lat lon");
  nc_inq_varid(ncid, "lcc", &mapping);
  EXPECT_NE(text_att(ncid, mapping, "crs_wkt"), "<absent>");  // completed by the gis module
  nc_close(ncid);
}

TEST_F(Writer, CarriesOtherOuterDimensionsLikeTime) {
  test::Dims dims = {{"time", 2}, {"member", 3}, {"level", 4}, {"lat", 3}, {"lon", 4}};
  std::vector<std::string> order = {"time", "member", "level", "lat", "lon"};
  std::vector<test::Var> vars = grid.coordinates();
  vars.push_back({"member", NC_INT, {"member"}, {{"long_name", "ensemble member"}}, {0, 1, 2}});
  vars.push_back({"t", NC_FLOAT, order, {{"units", "K"}, {"standard_name", "air_temperature"}}, test::fill(dims, order, SmallGrid::temp_k)});
  vars.push_back({"q", NC_FLOAT, order, {{"units", "1"}, {"standard_name", "specific_humidity"}}, test::fill(dims, order, SmallGrid::q)});
  vars.push_back({"z", NC_FLOAT, order, {{"units", "m"}, {"standard_name", "geopotential_height"}}, test::fill(dims, order, SmallGrid::z_m)});
  test::write_nc(input_path, dims, vars);
  InputDataset input({input_path}, {});
  EXPECT_EQ(input.grid().n_steps, 6u);
  OutputWriter writer(output_path, input, {});
  EXPECT_EQ(writer.n_steps(), 6u);
  writer.commit({});
  int ncid = -1, cape = -1, member = -1;
  ASSERT_EQ(nc_open(output_path.c_str(), NC_NOWRITE, &ncid), NC_NOERR);
  nc_inq_varid(ncid, "mu_cape", &cape);
  int ndims = 0, dimids[4];
  nc_inq_var(ncid, cape, nullptr, nullptr, &ndims, dimids, nullptr);
  ASSERT_EQ(ndims, 4);
  char name[NC_MAX_NAME + 1];
  nc_inq_dimname(ncid, dimids[1], name);
  EXPECT_STREQ(name, "member");
  EXPECT_EQ(nc_inq_varid(ncid, "member", &member), NC_NOERR);
  nc_close(ncid);
}

}  // namespace
}  // namespace latentlift
