// `latentlift analyze` under mpirun: ranks share the time steps, one file per time step.
#include <gtest/gtest.h>

#include <cstdio>
#include <filesystem>
#include <string>

#include "latentlift/comm.hpp"
#include "support/test_support.hpp"

namespace t = latentlift::test;
namespace fs = std::filesystem;

namespace {

const char* kMpiEnv = "OMPI_ALLOW_RUN_AS_ROOT=1 OMPI_ALLOW_RUN_AS_ROOT_CONFIRM=1 ";

std::string sample() { return std::string(LATENTLIFT_SOURCE_DIR) + "/sample_grids/vessaline_coast_lcc.nc"; }

std::string skip_reason() {
  if (!latentlift::comm::mpi_available()) return "built without MPI (LATENTLIFT_WITH_MPI=OFF or MPI not found)";
  if (t::run_command("command -v mpirun").exit_code != 0) return "mpirun not found";
  if (!fs::exists(sample())) return "no sample grid " + sample();
  return "";
}

}  // namespace

TEST(AnalyzeMpi, RanksWriteOneFilePerTimeStepWithTheSameFieldsAsOneRun) {
  if (auto why = skip_reason(); !why.empty()) GTEST_SKIP() << why;
  const std::string dir = t::scratch_dir("analyze_mpi");
  auto r = t::run_command(std::string(kMpiEnv) + "mpirun --oversubscribe -n 2 " + t::binary() + " analyze " +
                          sample() + " -o " + dir + "/lead.nc --quiet");
  ASSERT_EQ(r.exit_code, 0) << r.output;
  for (const char* name : {"lead_t0000.nc", "lead_t0001.nc", "lead_t0002.nc"})  // the sample has 3 times
    EXPECT_TRUE(fs::exists(dir + "/" + name)) << name;
  EXPECT_FALSE(fs::exists(dir + "/lead.nc"));
  // the per-time files hold the same fields as one serial run: their climatologies agree
  ASSERT_EQ(t::run_command(t::binary() + " analyze " + sample() + " -o " + dir + "/all.nc --quiet").exit_code, 0);
  ASSERT_EQ(t::run_command(t::binary() + " climatology " + dir + "/all.nc -o " + dir + "/a.nc --quiet").exit_code, 0);
  auto c = t::run_command(t::binary() + " climatology " + dir + "/lead_t000*.nc -o " + dir + "/b.nc --quiet");
  ASSERT_EQ(c.exit_code, 0) << c.output;
  auto same = t::run_command(t::python() + " " + t::test_dir() + "/stats/compare_stats.py " + dir + "/a.nc " + dir +
                             "/b.nc");
  EXPECT_EQ(same.exit_code, 0) << same.output;
}

TEST(AnalyzeMpi, ATimePlaceholderNamesTheFiles) {
  if (auto why = skip_reason(); !why.empty()) GTEST_SKIP() << why;
  const std::string dir = t::scratch_dir("analyze_mpi_pattern");
  auto r = t::run_command(std::string(kMpiEnv) + "mpirun --oversubscribe -n 3 " + t::binary() + " analyze " +
                          sample() + " -o '" + dir + "/step{time}.nc' --quiet");
  ASSERT_EQ(r.exit_code, 0) << r.output;
  EXPECT_TRUE(fs::exists(dir + "/step0002.nc"));
}

TEST(AnalyzeMpi, AFailingRankLeavesNoNewFiles) {
  if (auto why = skip_reason(); !why.empty()) GTEST_SKIP() << why;
  const std::string dir = t::scratch_dir("analyze_mpi_failure");
  // time step 2 (rank 1's share with 2 ranks) already exists: rank 1 fails, rank 0 removes its file
  { std::FILE* f = std::fopen((dir + "/lead_t0002.nc").c_str(), "w"); std::fclose(f); }
  auto r = t::run_command(std::string(kMpiEnv) + "mpirun --oversubscribe -n 2 " + t::binary() + " analyze " +
                          sample() + " -o " + dir + "/lead.nc --quiet");
  EXPECT_NE(r.exit_code, 0);
  EXPECT_NE(r.output.find("rank 1 of 2"), std::string::npos) << r.output;
  EXPECT_FALSE(fs::exists(dir + "/lead_t0000.nc"));
  EXPECT_FALSE(fs::exists(dir + "/lead_t0001.nc"));
  EXPECT_TRUE(fs::exists(dir + "/lead_t0002.nc"));  // not ours: left alone
}
