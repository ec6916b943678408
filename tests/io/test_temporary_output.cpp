// io::detail::TemporaryOutput: the one way outputs reach their target (README "Outputs").
#include <gtest/gtest.h>
#include <sys/stat.h>
#include <unistd.h>

#include <csignal>
#include <filesystem>
#include <fstream>
#include <string>

#include "io/temporary_output.hpp"
#include "latentlift/errors.hpp"
#include "support/test_support.hpp"

namespace fs = std::filesystem;
using latentlift::Error;
using latentlift::UsageError;
using latentlift::io::detail::TemporaryOutput;

namespace {

void write_text(const std::string& path, const std::string& text) { std::ofstream(path) << text; }

std::string read_text(const std::string& path) {
  std::ifstream in(path);
  return std::string(std::istreambuf_iterator<char>(in), {});
}

std::size_t files_in(const std::string& folder) {
  return static_cast<std::size_t>(std::distance(fs::directory_iterator(folder), fs::directory_iterator()));
}

}  // namespace

TEST(TemporaryOutput, TemporaryNameCarriesTheProcessId) {
  const std::string dir = latentlift::test::scratch_dir("tmpout_name");
  TemporaryOutput staged(dir + "/out.nc", false);
  EXPECT_EQ(staged.path(), dir + "/out.nc.tmp-" + std::to_string(::getpid()));
}

TEST(TemporaryOutput, CommitPutsTheFileInPlaceAndLeavesNoTemporary) {
  const std::string dir = latentlift::test::scratch_dir("tmpout_commit");
  TemporaryOutput staged(dir + "/out.nc", false);
  write_text(staged.path(), "complete");
  staged.commit();
  EXPECT_EQ(read_text(dir + "/out.nc"), "complete");
  EXPECT_EQ(files_in(dir), 1u);
}

TEST(TemporaryOutput, UncommittedTemporaryIsRemoved) {
  const std::string dir = latentlift::test::scratch_dir("tmpout_abandon");
  {
    TemporaryOutput staged(dir + "/out.nc", false);
    write_text(staged.path(), "half");
  }
  EXPECT_EQ(files_in(dir), 0u);
}

TEST(TemporaryOutput, TargetThatAppearedMeanwhileIsKeptWithoutOverwrite) {
  const std::string dir = latentlift::test::scratch_dir("tmpout_race");
  TemporaryOutput staged(dir + "/out.nc", false);
  write_text(staged.path(), "mine");
  write_text(dir + "/out.nc", "the other run's");  // a concurrent run committed first
  EXPECT_THROW(staged.commit(), UsageError);
  EXPECT_EQ(read_text(dir + "/out.nc"), "the other run's");
}

TEST(TemporaryOutput, OverwriteReplacesTheTarget) {
  const std::string dir = latentlift::test::scratch_dir("tmpout_overwrite");
  write_text(dir + "/out.nc", "old");
  TemporaryOutput staged(dir + "/out.nc", true);
  write_text(staged.path(), "new");
  staged.commit();
  EXPECT_EQ(read_text(dir + "/out.nc"), "new");
  EXPECT_EQ(files_in(dir), 1u);
}

TEST(TemporaryOutput, ExistingTargetIsRefusedAtStart) {
  const std::string dir = latentlift::test::scratch_dir("tmpout_exists");
  write_text(dir + "/out.nc", "old");
  EXPECT_THROW(TemporaryOutput(dir + "/out.nc", false), UsageError);
}

TEST(TemporaryOutput, DanglingSymlinkIsAnExistingTarget) {
  const std::string dir = latentlift::test::scratch_dir("tmpout_dangling");
  fs::create_symlink(dir + "/nowhere", dir + "/out.nc");
  EXPECT_THROW(TemporaryOutput::check_target(dir + "/out.nc", false), UsageError);
  EXPECT_NO_THROW(TemporaryOutput::check_target(dir + "/out.nc", true));
}

TEST(TemporaryOutput, DirectoryTargetIsRefusedEvenWithOverwrite) {
  const std::string dir = latentlift::test::scratch_dir("tmpout_directory");
  fs::create_directory(dir + "/out.nc");
  EXPECT_THROW(TemporaryOutput::check_target(dir + "/out.nc", true), UsageError);
  EXPECT_THROW(TemporaryOutput::check_target(dir + "/out.nc", false), UsageError);
}

TEST(TemporaryOutput, MissingFolderIsRefused) {
  const std::string dir = latentlift::test::scratch_dir("tmpout_folder");
  EXPECT_THROW(TemporaryOutput::check_target(dir + "/no/such/out.nc", false), UsageError);
}

TEST(TemporaryOutput, SideFilesAreCommittedTogether) {
  const std::string dir = latentlift::test::scratch_dir("tmpout_side");
  TemporaryOutput staged(dir + "/map.png", false);
  const std::string world = staged.stage_side_file(dir + "/map.pgw");
  write_text(staged.path(), "png");
  write_text(world, "world");
  staged.commit();
  EXPECT_EQ(read_text(dir + "/map.png"), "png");
  EXPECT_EQ(read_text(dir + "/map.pgw"), "world");
  EXPECT_EQ(files_in(dir), 2u);
}

TEST(TemporaryOutput, SideFileInTheWayDiscardsTheWholeOutput) {
  const std::string dir = latentlift::test::scratch_dir("tmpout_side_race");
  {
    TemporaryOutput staged(dir + "/map.png", false);
    const std::string world = staged.stage_side_file(dir + "/map.pgw");
    write_text(staged.path(), "png");
    write_text(world, "world");
    write_text(dir + "/map.pgw", "someone else's");
    EXPECT_THROW(staged.commit(), UsageError);
  }
  EXPECT_FALSE(fs::exists(dir + "/map.png"));  // all or nothing
  EXPECT_EQ(read_text(dir + "/map.pgw"), "someone else's");
  EXPECT_EQ(files_in(dir), 1u);
}

TEST(TemporaryOutput, IgnoredSignalStaysIgnored) {
  // nohup sets SIGHUP to SIG_IGN before exec: staging an output must not undo that. (The
  // handlers are installed by the first staged output of a process; ctest runs each test in a
  // process of its own. tests/robustness/test_faults.py checks nohup end to end.)
  struct sigaction ignore {}, before {}, after {};
  ignore.sa_handler = SIG_IGN;
  sigemptyset(&ignore.sa_mask);
  ASSERT_EQ(::sigaction(SIGHUP, &ignore, &before), 0);
  const std::string dir = latentlift::test::scratch_dir("tmpout_nohup");
  { TemporaryOutput staged(dir + "/out.nc", false); }
  ::sigaction(SIGHUP, &before, &after);
  EXPECT_EQ(after.sa_handler, SIG_IGN);
}
