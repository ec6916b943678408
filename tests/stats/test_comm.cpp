// The communicator layer: partition of time steps and per-rank output names.
#include <gtest/gtest.h>

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
