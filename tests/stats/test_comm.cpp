// The communicator layer: partition of time steps and per-rank output names.
#include <gtest/gtest.h>

#include <cstdlib>
#include <string>
#include <vector>

#include "latentlift/comm.hpp"

namespace comm = latentlift::comm;

TEST(Partition, BlocksCoverEveryItemOnceAndDifferByAtMostOne) {
  for (int size : {1, 2, 3, 7}) {
    std::size_t next = 0;
    for (int r = 0; r < size; ++r) {
      auto range = comm::partition(10, r, size);
      EXPECT_EQ(range.begin, next);
      EXPECT_GE(range.end - range.begin, 10u / size);
      EXPECT_LE(range.end - range.begin, 10u / size + 1);
      next = range.end;
    }
    EXPECT_EQ(next, 10u);
  }
}

TEST(Partition, MoreRanksThanItemsLeavesSomeEmpty) {
  EXPECT_EQ(comm::partition(2, 2, 3).begin, comm::partition(2, 2, 3).end);
}

TEST(RankOutputName, InsertsTheTimeIndexBeforeTheExtension) {
  EXPECT_EQ(comm::rank_output_name("out/OUT.nc", 3), "out/OUT_t0003.nc");
  EXPECT_EQ(comm::rank_output_name("run.d/OUT", 12), "run.d/OUT_t0012");
}

TEST(RankOutputName, ReplacesATimePlaceholder) {
  EXPECT_EQ(comm::rank_output_name("lead_{time}.nc", 7), "lead_0007.nc");
}

TEST(Communicator, WorldWithoutALauncherIsOneRank) {
  // Started by ctest, not by mpirun: the serial backend.
  if (std::getenv("OMPI_COMM_WORLD_SIZE")) GTEST_SKIP() << "running under mpirun";
  EXPECT_EQ(comm::world().size(), 1);
  EXPECT_EQ(comm::world().rank(), 0);
  EXPECT_EQ(comm::world().allreduce_max(5), 5);
}

TEST(Agree, OneRankWithAnInputErrorThrowsItUnprefixed) {
  auto failure = comm::capture([] { throw latentlift::InputError("in.nc", "time", "finite values"); });
  EXPECT_EQ(failure.first, 2);
  try {
    comm::agree(comm::world(), failure.first, failure.second);
    FAIL() << "agree did not throw";
  } catch (const latentlift::UsageError& e) {
    EXPECT_EQ(std::string(e.what()), "in.nc: variable 'time': finite values");
  }
}

TEST(Agree, NoFailureIsSilent) { EXPECT_NO_THROW(comm::agree(comm::world(), 0, "")); }

TEST(DistributedOverTimes, ASingleRankDoesEveryTimeStepUnderItsOwnName) {
  if (std::getenv("OMPI_COMM_WORLD_SIZE")) GTEST_SKIP() << "running under mpirun";
  std::vector<std::string> names;
  const auto n = comm::distributed_over_times(comm::world(), 3, "out.nc", [&](std::size_t, const std::string& out) {
    names.push_back(out);
  });
  EXPECT_EQ(n, 3u);
  EXPECT_EQ(names, (std::vector<std::string>{"out_t0000.nc", "out_t0001.nc", "out_t0002.nc"}));
}
