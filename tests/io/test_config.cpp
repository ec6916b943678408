// Configuration: config/default.toml documents the built-in defaults; --set overrides any
// key; unknown keys and bad values are UsageErrors naming the key; hPa become Pa.
#include <gtest/gtest.h>

#include <fstream>
#include <iterator>

#include "latentlift/config.hpp"
#include "latentlift/errors.hpp"
#include "support/test_support.hpp"

namespace latentlift {
namespace {

const std::string kDefaultToml = std::string(LATENTLIFT_SOURCE_DIR) + "/config/default.toml";

std::string usage_error_of(const std::vector<std::string>& sets, const std::string& path = "") {
  try {
    load_config(path, sets);
  } catch (const UsageError& e) {
    return e.what();
  }
  return "";
}

TEST(Config, DefaultTomlStatesExactlyTheBuiltInDefaults) {
  EXPECT_EQ(config_to_toml(load_config(kDefaultToml, {})), config_to_toml(load_config("", {})));
}

TEST(Config, DefaultsAreThoseOfTheDesign) {
  RunConfig config = load_config("", {});
  EXPECT_EQ(config.analysis.buoyancy, BuoyancyMode::virtual_temperature);
  EXPECT_DOUBLE_EQ(config.analysis.top_pressure_pa, 10000.0);   // 100 hPa
  EXPECT_DOUBLE_EQ(config.analysis.source_layer_pa, 30000.0);   // 300 hPa
  EXPECT_DOUBLE_EQ(config.analysis.min_excess_k, 0.01);
  EXPECT_EQ(config.analysis.mu_parcel, MuParcelRule::max_cape);
}

TEST(Config, DefaultTomlNamesTheMuParcelRule) {
  std::ifstream in(kDefaultToml);
  const std::string text((std::istreambuf_iterator<char>(in)), std::istreambuf_iterator<char>());
  EXPECT_NE(text.find("\nmu_parcel = \"max_cape\""), std::string::npos);
}

TEST(Config, SetChoosesTheMuParcelRuleAndTheSettingsRecordIt) {
  RunConfig config = load_config("", {"analysis.mu_parcel=max_theta_w"});
  EXPECT_EQ(config.analysis.mu_parcel, MuParcelRule::max_theta_w);
  EXPECT_NE(config_to_toml(config).find("mu_parcel = \"max_theta_w\""), std::string::npos);
  EXPECT_NE(config_to_toml(load_config("", {})).find("mu_parcel = \"max_cape\""), std::string::npos);
}

TEST(Config, EveryProfileLoads) {
  for (const char* name : {"ecmwf", "ncep-gfs", "cmip", "wrf-interp"})
    EXPECT_NO_THROW(load_config(std::string(LATENTLIFT_SOURCE_DIR) + "/config/profiles/" + name + ".toml", {})) << name;
}

TEST(Config, SetOverridesAKeyAndConvertsHectopascalsToPascals) {
  RunConfig config = load_config("", {"analysis.top_pressure_hpa=200", "analysis.buoyancy=temperature"});
  EXPECT_DOUBLE_EQ(config.analysis.top_pressure_pa, 20000.0);  // 1 hPa = 100 Pa
  EXPECT_EQ(config.analysis.buoyancy, BuoyancyMode::temperature);
}

TEST(Config, SetTakesAListOfAliases) {
  RunConfig config = load_config("", {"input.air_temperature=[\"tt\", \"temp2\"]"});
  EXPECT_EQ(config.aliases.at("air_temperature"), (std::vector<std::string>{"tt", "temp2"}));
}

TEST(Config, SetOverridesTheConfigFile) {
  std::string dir = test::scratch_dir("config_file");
  std::ofstream(dir + "/c.toml") << "[analysis]\nmin_excess_k = 0.5\n[run]\nblock_columns = 100\n";
  RunConfig config = load_config(dir + "/c.toml", {"analysis.min_excess_k=0.2"});
  EXPECT_DOUBLE_EQ(config.analysis.min_excess_k, 0.2);
  EXPECT_EQ(config.block_columns, 100u);
}

TEST(Config, UnknownKeyIsAUsageErrorNamingTheKey) {
  EXPECT_NE(usage_error_of({"analysis.top_pressure=100"}).find("analysis.top_pressure"), std::string::npos);
  EXPECT_NE(usage_error_of({"nosuch.key=1"}).find("nosuch"), std::string::npos);
}

TEST(Config, BadValuesAreUsageErrorsNamingTheKey) {
  EXPECT_NE(usage_error_of({"analysis.buoyancy=potential"}).find("analysis.buoyancy"), std::string::npos);
  EXPECT_NE(usage_error_of({"analysis.mu_parcel=max_theta_e"}).find("analysis.mu_parcel"), std::string::npos);
  EXPECT_NE(usage_error_of({"analysis.top_pressure_hpa=-5"}).find("analysis.top_pressure_hpa"), std::string::npos);
  EXPECT_NE(usage_error_of({"analysis.min_excess_k=warm"}).find("analysis.min_excess_k"), std::string::npos);
  EXPECT_NE(usage_error_of({"run.block_columns=0"}).find("run.block_columns"), std::string::npos);
  EXPECT_NE(usage_error_of({"output.deflate_level=12"}).find("output.deflate_level"), std::string::npos);
  EXPECT_NE(usage_error_of({"analysis_no_dot"}).find("section.key=value"), std::string::npos);
}

TEST(Config, AnalysisTopAboveTheTablesIsAUsageErrorNamingTheKey) {
  // The pseudo-adiabat tables end at 10 hPa (include/latentlift/pseudoadiabat.hpp).
  EXPECT_NE(usage_error_of({"analysis.top_pressure_hpa=5"}).find("analysis.top_pressure_hpa"), std::string::npos);
  EXPECT_EQ(usage_error_of({"analysis.top_pressure_hpa=10"}), "");
}

TEST(Config, UnknownKeyInAFileIsAUsageError) {
  std::string dir = test::scratch_dir("config_unknown");
  std::ofstream(dir + "/c.toml") << "[analysis]\nbuoyancy = \"virtual\"\ncolour = \"blue\"\n";
  EXPECT_NE(usage_error_of({}, dir + "/c.toml").find("analysis.colour"), std::string::npos);
}

TEST(Config, InvalidTomlIsAUsageErrorNamingTheFile) {
  std::string dir = test::scratch_dir("config_invalid");
  std::ofstream(dir + "/c.toml") << "[analysis\nbuoyancy = \n";
  EXPECT_NE(usage_error_of({}, dir + "/c.toml").find("c.toml"), std::string::npos);
}

}  // namespace
}  // namespace latentlift
