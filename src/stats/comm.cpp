// Communicator backends: serial, and MPI (OpenMPI from Debian) when built with it.
#include "latentlift/comm.hpp"

#include <algorithm>
#include <cstdio>
#include <cstdlib>
#include <cstring>
#include <filesystem>
#include <memory>

#include "latentlift/errors.hpp"

#ifdef LATENTLIFT_HAVE_MPI
#include <mpi.h>
#endif

namespace latentlift::comm {

namespace {

class SerialCommunicator final : public Communicator {
 public:
  int rank() const override { return 0; }
  int size() const override { return 1; }
  const char* backend() const override { return "serial"; }
  int allreduce_max(int value) override { return value; }
  long long allreduce_sum(long long value) override { return value; }
  void send_raw(int, const void*, std::size_t) override {
    throw Error("communicator: send on a serial run (one rank only)");
  }
  void recv_raw(int, void*, std::size_t) override {
    throw Error("communicator: receive on a serial run (one rank only)");
  }
  void broadcast_bytes(std::vector<char>&, int) override {}
  void barrier() override {}
  [[noreturn]] void abort(int exit_code) override { std::exit(exit_code); }
};

#ifdef LATENTLIFT_HAVE_MPI

void check(int code, const char* what) {
  if (code != MPI_SUCCESS) {
    char text[MPI_MAX_ERROR_STRING];
    int length = 0;
    MPI_Error_string(code, text, &length);
    throw Error(std::string("MPI: ") + what + " failed: " + std::string(text, length));
  }
}

// Largest message sent in one call (MPI counts are int).
constexpr std::size_t kChunk = std::size_t(1) << 30;

class MpiCommunicator final : public Communicator {
 public:
  MpiCommunicator() {
    int initialized = 0;
    MPI_Initialized(&initialized);
    if (!initialized) {
      int provided = 0;
      MPI_Init_thread(nullptr, nullptr, MPI_THREAD_FUNNELED, &provided);
      owns_ = true;
    }
    MPI_Comm_rank(MPI_COMM_WORLD, &rank_);
    MPI_Comm_size(MPI_COMM_WORLD, &size_);
  }
  ~MpiCommunicator() override {
    int finalized = 0;
    MPI_Finalized(&finalized);
    if (owns_ && !finalized) MPI_Finalize();
  }
  int rank() const override { return rank_; }
  int size() const override { return size_; }
  const char* backend() const override { return "mpi"; }
  int allreduce_max(int value) override {
    int result = 0;
    check(MPI_Allreduce(&value, &result, 1, MPI_INT, MPI_MAX, MPI_COMM_WORLD), "MPI_Allreduce");
    return result;
  }
  long long allreduce_sum(long long value) override {
    long long result = 0;
    check(MPI_Allreduce(&value, &result, 1, MPI_LONG_LONG, MPI_SUM, MPI_COMM_WORLD), "MPI_Allreduce");
    return result;
  }
  void send_raw(int dest, const void* data, std::size_t size) override {
    const char* bytes = static_cast<const char*>(data);
    for (std::size_t off = 0; off < size; off += kChunk) {
      const int n = static_cast<int>(std::min(kChunk, size - off));
      check(MPI_Send(bytes + off, n, MPI_BYTE, dest, kTag, MPI_COMM_WORLD), "MPI_Send");
    }
  }
  void recv_raw(int source, void* data, std::size_t size) override {
    char* bytes = static_cast<char*>(data);
    for (std::size_t off = 0; off < size; off += kChunk) {
      const int n = static_cast<int>(std::min(kChunk, size - off));
      check(MPI_Recv(bytes + off, n, MPI_BYTE, source, kTag, MPI_COMM_WORLD, MPI_STATUS_IGNORE), "MPI_Recv");
    }
  }
  void broadcast_bytes(std::vector<char>& bytes, int root) override {
    unsigned long long size = bytes.size();
    check(MPI_Bcast(&size, 1, MPI_UNSIGNED_LONG_LONG, root, MPI_COMM_WORLD), "MPI_Bcast");
    bytes.resize(size);
    for (std::size_t off = 0; off < bytes.size(); off += kChunk) {
      const int n = static_cast<int>(std::min<std::size_t>(kChunk, bytes.size() - off));
      check(MPI_Bcast(bytes.data() + off, n, MPI_BYTE, root, MPI_COMM_WORLD), "MPI_Bcast");
    }
  }
  void barrier() override { check(MPI_Barrier(MPI_COMM_WORLD), "MPI_Barrier"); }
  [[noreturn]] void abort(int exit_code) override {
    std::fflush(stdout);
    std::fflush(stderr);
    MPI_Abort(MPI_COMM_WORLD, exit_code);
    std::exit(exit_code);
  }

 private:
  static constexpr int kTag = 4242;
  int rank_ = 0, size_ = 1;
  bool owns_ = false;
};

bool launched_by_mpi() {
  if (const char* flag = std::getenv("LATENTLIFT_MPI")) return std::strcmp(flag, "0") != 0;
  return std::getenv("OMPI_COMM_WORLD_SIZE") || std::getenv("PMI_SIZE") || std::getenv("PMIX_RANK");
}

#endif

}  // namespace

void Communicator::send_bytes(int dest, const std::vector<char>& bytes) {
  const unsigned long long size = bytes.size();
  send_raw(dest, &size, sizeof size);
  send_raw(dest, bytes.data(), bytes.size());
}

std::vector<char> Communicator::recv_bytes(int source) {
  unsigned long long size = 0;
  recv_raw(source, &size, sizeof size);
  std::vector<char> bytes(size);
  recv_raw(source, bytes.data(), bytes.size());
  return bytes;
}

namespace {

std::unique_ptr<Communicator> make_world() {
#ifdef LATENTLIFT_HAVE_MPI
  if (launched_by_mpi()) return std::make_unique<MpiCommunicator>();
#else
  // Several copies started by a launcher, each believing it is alone, would all do all the work
  // and race for the same output: refuse instead.
  for (const char* name : {"OMPI_COMM_WORLD_SIZE", "PMI_SIZE"})
    if (const char* size = std::getenv(name); size && std::atoi(size) > 1)
      throw UsageError(std::string("started by an MPI launcher with ") + size +
                       " processes, but this latentlift was built without MPI (LATENTLIFT_WITH_MPI=OFF or MPI not "
                       "found): run it without mpirun, or rebuild with MPI");
#endif
  return std::make_unique<SerialCommunicator>();
}

}  // namespace

Communicator& world() {
  // Destroyed at exit, which finalises MPI when this process initialised it.
  static std::unique_ptr<Communicator> instance = make_world();
  return *instance;
}

bool mpi_available() {
#ifdef LATENTLIFT_HAVE_MPI
  return true;
#else
  return false;
#endif
}

Range partition(std::size_t total, int rank, int size) {
  const std::size_t r = static_cast<std::size_t>(rank), s = static_cast<std::size_t>(size);
  const std::size_t base = total / s, extra = total % s;
  const std::size_t begin = r * base + std::min(r, extra);
  return {begin, begin + base + (r < extra ? 1 : 0)};
}

std::string rank_output_name(const std::string& pattern, std::size_t time_index) {
  char index[32];
  std::snprintf(index, sizeof index, "%04zu", time_index);
  const std::size_t brace = pattern.find("{time}");
  if (brace != std::string::npos) return pattern.substr(0, brace) + index + pattern.substr(brace + 6);
  const std::size_t slash = pattern.find_last_of('/');
  const std::size_t dot = pattern.find_last_of('.');
  const std::size_t cut = (dot == std::string::npos || (slash != std::string::npos && dot < slash)) ? pattern.size() : dot;
  return pattern.substr(0, cut) + "_t" + index + pattern.substr(cut);
}

std::pair<int, std::string> capture(const std::function<void()>& body) {
  try {
    body();
  } catch (const RankFailed& e) {
    return {e.exit_code(), ""};
  } catch (const InputError& e) {
    return {2, e.what()};
  } catch (const UsageError& e) {
    return {2, e.what()};
  } catch (const std::exception& e) {
    return {1, e.what()};
  }
  return {0, ""};
}

void agree(Communicator& comm, int code, const std::string& message) {
  const int worst = comm.allreduce_max(code);
  if (worst == 0) return;
  const int first = comm.size() - comm.allreduce_max(code ? comm.size() - comm.rank() : 0);
  if (comm.rank() != first) throw RankFailed(worst);
  const std::string text = comm.size() > 1 ? "rank " + std::to_string(comm.rank()) + " of " +
                                                 std::to_string(comm.size()) + ": " + message
                                           : message;
  if (code == 2) throw UsageError(text);  // exit code 2, like InputError
  throw Error(text);
}

std::size_t distributed_over_times(Communicator& comm, std::size_t n_times, const std::string& pattern,
                                   const std::function<void(std::size_t, const std::string&)>& work) {
  const Range mine = partition(n_times, comm.rank(), comm.size());
  std::vector<std::string> written;
  auto [code, message] = capture([&] {
    for (std::size_t t = mine.begin; t < mine.end; ++t) {
      const std::string output = rank_output_name(pattern, t);
      work(t, output);
      written.push_back(output);
    }
  });
  const int worst = comm.allreduce_max(code);
  if (worst != 0) {
    std::error_code ignored;
    for (const auto& file : written) std::filesystem::remove(file, ignored);
  }
  agree(comm, code, message);
  return static_cast<std::size_t>(comm.allreduce_sum(static_cast<long long>(written.size())));
}

}  // namespace latentlift::comm
