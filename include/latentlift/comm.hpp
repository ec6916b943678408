// A small communicator layer: a serial backend and, when built with MPI
// (LATENTLIFT_HAVE_MPI), an MPI backend used when the process was started by
// mpirun/srun. mpi.h stays inside src/stats/comm.cpp.
#pragma once

#include <cstddef>
#include <cstdint>
#include <functional>
#include <string>
#include <vector>

#include "latentlift/errors.hpp"

namespace latentlift::comm {

/// The processes of one job. rank() in [0, size()); the serial backend has size() == 1.
class Communicator {
 public:
  virtual ~Communicator() = default;
  virtual int rank() const = 0;
  virtual int size() const = 0;
  /// "serial" or "mpi".
  virtual const char* backend() const = 0;
  /// Maximum over all ranks (collective).
  virtual int allreduce_max(int value) = 0;
  /// Sum over all ranks (collective).
  virtual long long allreduce_sum(long long value) = 0;
  /// Point-to-point transfer of `size` bytes whose size the receiver knows (chunked under MPI).
  virtual void send_raw(int dest, const void* data, std::size_t size) = 0;
  virtual void recv_raw(int source, void* data, std::size_t size) = 0;
  /// Point-to-point transfer of a byte buffer of any size.
  void send_bytes(int dest, const std::vector<char>& bytes);
  std::vector<char> recv_bytes(int source);
  /// Broadcast a byte buffer from rank root (collective).
  virtual void broadcast_bytes(std::vector<char>& bytes, int root) = 0;
  /// Wait for all ranks (collective).
  virtual void barrier() = 0;
  /// Stop every rank of the job with this exit code (MPI_Abort); never returns.
  [[noreturn]] virtual void abort(int exit_code) = 0;
};

/// The world communicator: MPI when built with MPI and launched by mpirun/srun (environment
/// OMPI_COMM_WORLD_SIZE, PMI_SIZE or PMIX_RANK) unless LATENTLIFT_MPI=0; otherwise serial.
/// MPI is initialised on first use and finalised at program exit.
Communicator& world();
/// True when the MPI backend is compiled in.
bool mpi_available();

/// The half-open index range [begin, end) of items of a contiguous block partition of
/// `total` items over `size` ranks (sizes differ by at most one; lower ranks get more).
struct Range {
  std::size_t begin, end;
};
Range partition(std::size_t total, int rank, int size);

/// Per-rank output name for `analyze` under mpirun: "{time}" in the pattern is replaced by the
/// zero-padded time index (4 digits), else "_t%04d" is inserted before the extension
/// (OUT.nc -> OUT_t0003.nc).
std::string rank_output_name(const std::string& pattern, std::size_t time_index);

/// Thrown on the ranks that did not fail themselves when another rank failed; the failing
/// rank reports the error, these only end with its exit code.
class RankFailed : public Error {
 public:
  explicit RankFailed(int exit_code) : Error("another rank failed"), exit_code_(exit_code) {}
  int exit_code() const { return exit_code_; }

 private:
  int exit_code_;
};

/// Collective error check. code: 0 ok, 1 runtime failure, 2 bad input or usage. When any rank
/// has code != 0, the lowest failing rank throws its message (UsageError for 2, Error for 1;
/// prefixed "rank r of n: " when size() > 1) and every other rank throws RankFailed.
void agree(Communicator& comm, int code, const std::string& message);

/// Run body on this rank and return {code, message} of the exception it threw (InputError and
/// UsageError -> 2, any other std::exception -> 1), or {0, ""}.
std::pair<int, std::string> capture(const std::function<void()>& body);

/// `analyze` under mpirun: time indices 0..n_times-1 are shared among the ranks in contiguous
/// blocks; work(time_index, output) writes one file per time step, named
/// rank_output_name(pattern, time_index). When any rank fails, every rank removes the files it
/// wrote in this call and agree() reports. Returns the number of files written by all ranks.
std::size_t distributed_over_times(Communicator& comm, std::size_t n_times, const std::string& pattern,
                                   const std::function<void(std::size_t time_index, const std::string& output)>& work);

}  // namespace latentlift::comm
