// `latentlift climatology` end to end: generated analyze-like inputs (several files,
// several valid times) checked against an independent NumPy computation
// (tests/stats/reference_climatology.py), merges and --update against single runs,
// refusal of counted times, and MPI runs against the serial run.
#include <gtest/gtest.h>

#include <filesystem>
#include <string>

#include "latentlift/comm.hpp"
#include "support/test_support.hpp"

namespace t = latentlift::test;
namespace fs = std::filesystem;

namespace {

std::string script(const std::string& name) { return t::python() + " " + t::test_dir() + "/stats/" + name; }

// Writes analyze-like files into dir/in (make_analysis_outputs.py options), returns "dir/in/*.nc".
std::string generate(const std::string& dir, const std::string& options = "") {
  auto r = t::run_command(script("make_analysis_outputs.py") + " " + dir + "/in " + options);
  EXPECT_EQ(r.exit_code, 0) << r.output;
  return dir + "/in/analysis_*.nc";
}

t::CommandResult climatology(const std::string& args) {
  return t::run_command(t::binary() + " climatology " + args + " --quiet");
}

t::CommandResult compare(const std::string& a, const std::string& b, const std::string& options = "") {
  return t::run_command(script("compare_stats.py") + " " + options + " " + a + " " + b);
}

const char* kMpiEnv = "OMPI_ALLOW_RUN_AS_ROOT=1 OMPI_ALLOW_RUN_AS_ROOT_CONFIRM=1 OMPI_MCA_rmaps_base_oversubscribe=1 ";

bool mpi_runnable(std::string& why) {
  if (!latentlift::comm::mpi_available()) {
    why = "built without MPI (LATENTLIFT_WITH_MPI=OFF or MPI not found)";
    return false;
  }
  if (t::run_command("command -v mpirun").exit_code != 0) {
    why = "mpirun not found";
    return false;
  }
  return true;
}

}  // namespace

TEST(ClimatologyCommand, MonthlyStatisticsMatchTheNumPyReference) {
  const std::string dir = t::scratch_dir("clim_reference_month");
  const std::string inputs = generate(dir, "--levels 4");
  auto r = climatology(inputs + " -o " + dir + "/stats.nc --group month");
  ASSERT_EQ(r.exit_code, 0) << r.output;
  auto ref = t::run_command(script("reference_climatology.py") + " " + dir + "/stats.nc " + inputs);
  EXPECT_EQ(ref.exit_code, 0) << ref.output;
}

TEST(ClimatologyCommand, HourlyStatisticsMatchTheNumPyReference) {
  const std::string dir = t::scratch_dir("clim_reference_hour");
  const std::string inputs = generate(dir, "--files 2 --times 5 --step-hours 13");
  auto r = climatology(inputs + " -o " + dir + "/stats.nc --group hour");
  ASSERT_EQ(r.exit_code, 0) << r.output;
  auto ref = t::run_command(script("reference_climatology.py") + " " + dir + "/stats.nc " + inputs);
  EXPECT_EQ(ref.exit_code, 0) << ref.output;
}

TEST(ClimatologyCommand, SeasonalAndOverallStatisticsMatchTheNumPyReference) {
  const std::string dir = t::scratch_dir("clim_reference_season");
  const std::string inputs = generate(dir, "--files 2 --times 6");
  for (const std::string group : {"season", "all"}) {
    const std::string out = dir + "/" + group + ".nc";
    auto r = climatology(inputs + " -o " + out + " --group " + group);
    ASSERT_EQ(r.exit_code, 0) << r.output;
    auto ref = t::run_command(script("reference_climatology.py") + " " + out + " " + inputs);
    EXPECT_EQ(ref.exit_code, 0) << group << ": " << ref.output;
  }
}

TEST(ClimatologyCommand, GdalOpensTheClimatologyWithoutWarnings) {
  // GDAL (gdalinfo, a real GIS client) needs one coordinate per dimension: "Several 1D variables are
  // indexed by dimension group" or "not a Time or Vertical dimension" warnings mean it could not tell.
  const std::string dir = t::scratch_dir("clim_gdal");
  const std::string inputs = generate(dir, "--files 1 --times 4");
  auto r = climatology(inputs + " -o " + dir + "/stats.nc --group season");
  ASSERT_EQ(r.exit_code, 0) << r.output;
  auto info = t::run_command("gdalinfo NETCDF:" + dir + "/stats.nc:mu_cape_mean");
  EXPECT_EQ(info.exit_code, 0) << info.output;
  EXPECT_EQ(info.output.find("Warning"), std::string::npos) << info.output;
  EXPECT_NE(info.output.find("Band 4"), std::string::npos) << "one band per season: " << info.output;
}

TEST(ClimatologyCommand, UpdateWithTheRestEqualsOneRunOverAll) {
  const std::string dir = t::scratch_dir("clim_update");
  const std::string inputs = generate(dir, "--levels 3");
  ASSERT_EQ(climatology(inputs + " -o " + dir + "/whole.nc --group season").exit_code, 0);
  auto first = climatology(dir + "/in/analysis_01.nc -o " + dir + "/parts.nc --group season");
  ASSERT_EQ(first.exit_code, 0) << first.output;
  auto rest = climatology(dir + "/in/analysis_02.nc " + dir + "/in/analysis_00.nc -o " + dir + "/parts.nc --update");
  ASSERT_EQ(rest.exit_code, 0) << rest.output;
  auto same = compare(dir + "/whole.nc", dir + "/parts.nc");
  EXPECT_EQ(same.exit_code, 0) << same.output;
}

TEST(ClimatologyCommand, MergingTwoClimatologiesEqualsOneRunOverAll) {
  const std::string dir = t::scratch_dir("clim_merge_files");
  const std::string inputs = generate(dir, "--levels 2");
  ASSERT_EQ(climatology(inputs + " -o " + dir + "/whole.nc --group hour").exit_code, 0);
  ASSERT_EQ(climatology(dir + "/in/analysis_00.nc " + dir + "/in/analysis_02.nc -o " + dir + "/a.nc --group hour").exit_code, 0);
  ASSERT_EQ(climatology(dir + "/in/analysis_01.nc -o " + dir + "/b.nc --group hour").exit_code, 0);
  auto merged = climatology(dir + "/a.nc " + dir + "/b.nc -o " + dir + "/merged.nc");  // grouping taken from them
  ASSERT_EQ(merged.exit_code, 0) << merged.output;
  auto same = compare(dir + "/whole.nc", dir + "/merged.nc");
  EXPECT_EQ(same.exit_code, 0) << same.output;
}

TEST(ClimatologyCommand, MergingClimatologiesThatShareATimeIsRefused) {
  const std::string dir = t::scratch_dir("clim_merge_overlap");
  generate(dir, "--files 2");
  ASSERT_EQ(climatology(dir + "/in/analysis_00.nc -o " + dir + "/a.nc").exit_code, 0);
  auto r = climatology(dir + "/a.nc " + dir + "/in/analysis_00.nc -o " + dir + "/merged.nc");
  EXPECT_EQ(r.exit_code, 2);
  EXPECT_NE(r.output.find("each valid time once"), std::string::npos) << r.output;
}

TEST(ClimatologyCommand, ATimeStepAlreadyCountedIsRefused) {
  const std::string dir = t::scratch_dir("clim_duplicate_update");
  generate(dir, "--files 2");
  ASSERT_EQ(climatology(dir + "/in/analysis_00.nc -o " + dir + "/stats.nc").exit_code, 0);
  const auto before = fs::last_write_time(dir + "/stats.nc");
  auto again = climatology(dir + "/in/analysis_00.nc -o " + dir + "/stats.nc --update");
  EXPECT_EQ(again.exit_code, 2);
  EXPECT_NE(again.output.find("already counted"), std::string::npos) << again.output;
  EXPECT_EQ(fs::last_write_time(dir + "/stats.nc"), before);  // file untouched
}

TEST(ClimatologyCommand, TheSameValidTimeInTwoInputsIsRefused) {
  const std::string dir = t::scratch_dir("clim_duplicate_inputs");
  generate(dir, "--files 1");
  fs::copy_file(dir + "/in/analysis_00.nc", dir + "/copy.nc");
  auto r = climatology(dir + "/in/analysis_00.nc " + dir + "/copy.nc -o " + dir + "/stats.nc");
  EXPECT_EQ(r.exit_code, 2);
  EXPECT_NE(r.output.find("each valid time once"), std::string::npos) << r.output;
  EXPECT_FALSE(fs::exists(dir + "/stats.nc"));
}

TEST(ClimatologyCommand, AnExistingOutputNeedsUpdate) {
  const std::string dir = t::scratch_dir("clim_exists");
  generate(dir, "--files 2");
  ASSERT_EQ(climatology(dir + "/in/analysis_00.nc -o " + dir + "/stats.nc").exit_code, 0);
  auto r = climatology(dir + "/in/analysis_01.nc -o " + dir + "/stats.nc");
  EXPECT_EQ(r.exit_code, 2);
  EXPECT_NE(r.output.find("--update"), std::string::npos) << r.output;
}

TEST(ClimatologyCommand, UpdateRefusesAnotherGrouping) {
  const std::string dir = t::scratch_dir("clim_group_mismatch");
  generate(dir, "--files 2");
  ASSERT_EQ(climatology(dir + "/in/analysis_00.nc -o " + dir + "/stats.nc --group month").exit_code, 0);
  auto r = climatology(dir + "/in/analysis_01.nc -o " + dir + "/stats.nc --update --group hour");
  EXPECT_EQ(r.exit_code, 2);
  EXPECT_NE(r.output.find("groups by month"), std::string::npos) << r.output;
}

TEST(ClimatologyCommand, UpdateRefusesAnotherGrid) {
  const std::string dir = t::scratch_dir("clim_grid_mismatch");
  generate(dir, "--files 1");
  t::run_command(script("make_analysis_outputs.py") + " " + dir + "/wide --files 1 --nx 9 --start 2004-01-01");
  ASSERT_EQ(climatology(dir + "/in/analysis_00.nc -o " + dir + "/stats.nc").exit_code, 0);
  auto r = climatology(dir + "/wide/analysis_00.nc -o " + dir + "/stats.nc --update");
  EXPECT_EQ(r.exit_code, 2);
  EXPECT_NE(r.output.find("x=7"), std::string::npos) << r.output;  // names the expected grid
}

TEST(ClimatologyCommand, InputsAnalysedWithOtherSettingsAreRefused) {
  const std::string dir = t::scratch_dir("clim_settings");
  generate(dir, "--files 1");
  t::run_command(script("make_analysis_outputs.py") + " " + dir + "/other --files 1 --start 2003-01-01 --buoyancy temperature");
  auto r = climatology(dir + "/in/analysis_00.nc " + dir + "/other/analysis_00.nc -o " + dir + "/stats.nc");
  EXPECT_EQ(r.exit_code, 2);
  EXPECT_NE(r.output.find("analysis settings"), std::string::npos) << r.output;
}

TEST(ClimatologyCommand, InputsWithAnotherMuParcelRuleAreRefused) {
  const std::string dir = t::scratch_dir("clim_mu_rule");
  generate(dir, "--files 1");  // mu_parcel = "max_cape"
  t::run_command(script("make_analysis_outputs.py") + " " + dir +
                 "/other --files 1 --start 2003-01-01 --mu-parcel max_theta_w");
  auto r = climatology(dir + "/in/analysis_00.nc " + dir + "/other/analysis_00.nc -o " + dir + "/stats.nc");
  EXPECT_EQ(r.exit_code, 2);
  EXPECT_NE(r.output.find("analysis_mu_parcel"), std::string::npos) << r.output;
}

TEST(ClimatologyCommand, OutputsRecordingNoMuParcelRuleCountAsThetaWRule) {
  // Outputs written before analysis.mu_parcel existed chose the MU parcel by theta_w: they
  // merge with max_theta_w outputs, not with max_cape ones.
  const std::string dir = t::scratch_dir("clim_mu_rule_old");
  t::run_command(script("make_analysis_outputs.py") + " " + dir + "/old --files 1 --mu-parcel none");
  t::run_command(script("make_analysis_outputs.py") + " " + dir +
                 "/theta --files 1 --start 2003-01-01 --mu-parcel max_theta_w");
  t::run_command(script("make_analysis_outputs.py") + " " + dir + "/cape --files 1 --start 2004-01-01");
  auto ok = climatology(dir + "/old/analysis_00.nc " + dir + "/theta/analysis_00.nc -o " + dir + "/a.nc");
  EXPECT_EQ(ok.exit_code, 0) << ok.output;
  auto header = t::run_command("ncdump -h " + dir + "/a.nc");
  EXPECT_NE(header.output.find("analysis_mu_parcel = \"max_theta_w\""), std::string::npos) << header.output;
  auto refused = climatology(dir + "/old/analysis_00.nc " + dir + "/cape/analysis_00.nc -o " + dir + "/b.nc");
  EXPECT_EQ(refused.exit_code, 2) << refused.output;
}

TEST(ClimatologyCommand, ModelInputsAreAnalysedWithTheConfiguredMuParcelRule) {
  // --set analysis.mu_parcel reaches the analysis of model inputs: the statistics equal those
  // of `analyze --set analysis.mu_parcel=max_theta_w` output, and the file records the rule.
  const std::string sample = std::string(LATENTLIFT_SOURCE_DIR) + "/sample_grids/aurel_global_5deg.nc";
  if (!fs::exists(sample)) GTEST_SKIP() << "no sample grid " << sample;
  const std::string dir = t::scratch_dir("clim_model_input_mu_rule");
  const std::string rule = " --set analysis.mu_parcel=max_theta_w";
  auto a = t::run_command(t::binary() + " analyze " + sample + " -o " + dir + "/analysis.nc --quiet" + rule);
  ASSERT_EQ(a.exit_code, 0) << a.output;
  ASSERT_EQ(climatology(dir + "/analysis.nc -o " + dir + "/from_output.nc").exit_code, 0);
  auto m = climatology(sample + " -o " + dir + "/from_model.nc" + rule);
  ASSERT_EQ(m.exit_code, 0) << m.output;
  auto header = t::run_command("ncdump -h " + dir + "/from_model.nc");
  EXPECT_NE(header.output.find("analysis_mu_parcel = \"max_theta_w\""), std::string::npos) << header.output;
  auto same = compare(dir + "/from_output.nc", dir + "/from_model.nc", "--statistics-only");
  EXPECT_EQ(same.exit_code, 0) << same.output;
}

TEST(ClimatologyCommand, ModelInputsAreAnalysedLikeTheirAnalyzeOutput) {
  const std::string sample = std::string(LATENTLIFT_SOURCE_DIR) + "/sample_grids/aurel_global_5deg.nc";
  if (!fs::exists(sample)) GTEST_SKIP() << "no sample grid " << sample;
  const std::string dir = t::scratch_dir("clim_model_input");
  auto a = t::run_command(t::binary() + " analyze " + sample + " -o " + dir + "/analysis.nc --quiet");
  ASSERT_EQ(a.exit_code, 0) << a.output;
  ASSERT_EQ(climatology(dir + "/analysis.nc -o " + dir + "/from_output.nc").exit_code, 0);
  auto m = climatology(sample + " -o " + dir + "/from_model.nc");
  ASSERT_EQ(m.exit_code, 0) << m.output;
  // the analyze output may carry a completed grid mapping the model input lacks: statistics only
  auto same = compare(dir + "/from_output.nc", dir + "/from_model.nc", "--statistics-only");
  EXPECT_EQ(same.exit_code, 0) << same.output;
}

TEST(ClimatologyCommand, ModelInputsWithLevelFieldsCountStabilityClassesLikeTheirAnalyzeOutput) {
  // climatology --level-fields on a model input runs the analysis with level fields; its
  // stability class counts (and every other statistic) equal those read back from
  // `analyze --level-fields` output of the same input (compared by compare_stats.py).
  const std::string sample = std::string(LATENTLIFT_SOURCE_DIR) + "/sample_grids/aurel_global_5deg.nc";
  if (!fs::exists(sample)) GTEST_SKIP() << "no sample grid " << sample;
  const std::string dir = t::scratch_dir("clim_model_input_levels");
  auto a = t::run_command(t::binary() + " analyze " + sample + " -o " + dir + "/analysis.nc --level-fields --quiet");
  ASSERT_EQ(a.exit_code, 0) << a.output;
  ASSERT_EQ(climatology(dir + "/analysis.nc -o " + dir + "/from_output.nc").exit_code, 0);
  auto m = climatology(sample + " -o " + dir + "/from_model.nc --level-fields");
  ASSERT_EQ(m.exit_code, 0) << m.output;
  auto header = t::run_command("ncdump -h " + dir + "/from_model.nc");
  EXPECT_NE(header.output.find("stability_class_count"), std::string::npos) << header.output;
  auto same = compare(dir + "/from_output.nc", dir + "/from_model.nc", "--statistics-only");
  EXPECT_EQ(same.exit_code, 0) << same.output;
}

TEST(ClimatologyMpi, TwoAndThreeRanksWriteTheSameFileAsOneProcess) {
  std::string why;
  if (!mpi_runnable(why)) GTEST_SKIP() << why;
  const std::string dir = t::scratch_dir("clim_mpi");
  const std::string inputs = generate(dir, "--levels 3");
  ASSERT_EQ(climatology(inputs + " -o " + dir + "/serial.nc --group month").exit_code, 0);
  for (int ranks : {2, 3}) {
    const std::string out = dir + "/ranks" + std::to_string(ranks) + ".nc";
    auto r = t::run_command(std::string(kMpiEnv) + "mpirun --oversubscribe -n " + std::to_string(ranks) + " " +
                            t::binary() + " climatology " + inputs + " -o " + out + " --group month --quiet");
    ASSERT_EQ(r.exit_code, 0) << r.output;
    auto same = compare(dir + "/serial.nc", out);
    EXPECT_EQ(same.exit_code, 0) << ranks << " ranks: " << same.output;
  }
}

TEST(ClimatologyMpi, AFailingRankStopsTheJobWithoutOutput) {
  std::string why;
  if (!mpi_runnable(why)) GTEST_SKIP() << why;
  const std::string dir = t::scratch_dir("clim_mpi_failure");
  // the last time step of the last file (rank 1's share) holds an invalid latent_class
  const std::string inputs = generate(dir, "--bad-class-at 2:3");
  auto r = t::run_command(std::string(kMpiEnv) + "mpirun --oversubscribe -n 2 " + t::binary() + " climatology " +
                          inputs + " -o " + dir + "/stats.nc --quiet");
  EXPECT_NE(r.exit_code, 0);
  EXPECT_NE(r.output.find("rank 1 of 2"), std::string::npos) << r.output;
  EXPECT_NE(r.output.find("latent_class"), std::string::npos) << r.output;
  for (const auto& entry : fs::directory_iterator(dir))
    EXPECT_EQ(entry.path().filename().string().rfind("stats.nc", 0), std::string::npos) << entry.path();
}
