// Direct chunk reading of NetCDF-4 (HDF5) inputs: the compressed chunks of a variable are
// read raw with HDF5's direct chunk read (under the process-wide netCDF lock, since the
// serial HDF5 library is shared with netCDF-C) and inflated with libdeflate, shuffle undone,
// outside the lock, by every thread that helps. Variables whose storage this path does not
// know (other filters, unallocated chunks, byte orders or types other than little-endian
// float32/float64) are left to netCDF-C: ChunkReader::supports() says which.
#pragma once

#include <atomic>
#include <condition_variable>
#include <cstddef>
#include <exception>
#include <memory>
#include <mutex>
#include <string>
#include <vector>

namespace latentlift::io::detail {

/// The decoded values of one variable at one outer index: the variable's dimensions with the
/// outer ones (time, ...) fixed, row-major as nc_get_vara would return the whole slab.
struct DecodedSlab {
  bool is_float = true;
  std::vector<float> floats;    // float32 variables
  std::vector<double> doubles;  // float64 variables
};

/// One input variable read chunk by chunk, bypassing netCDF-C.
class ChunkReader {
 public:
  /// Inspect variable `name` of the NetCDF-4 file `path` (opened read-only with HDF5 beside
  /// netCDF-C). outer_dims[i] is true for the dimensions fixed per step (time and other outer
  /// dimensions). Call with the netCDF lock held. Never throws for an unknown layout:
  /// supports() is then false and the caller reads through netCDF-C.
  ChunkReader(const std::string& path, const std::string& name, const std::vector<std::size_t>& lengths,
              const std::vector<bool>& outer_dims, bool is_float);
  ~ChunkReader();
  ChunkReader(const ChunkReader&) = delete;
  ChunkReader& operator=(const ChunkReader&) = delete;

  /// True when this path can read the variable (deflate and/or shuffle, chunked, LE float).
  bool supports() const;
  /// Why not, when supports() is false (for diagnostics and tests).
  const std::string& reason() const;
  /// Number of chunks that make up the slab at one outer index.
  std::size_t chunks_per_slab() const;
  /// Size slab for the values at one outer index (values left unset).
  void prepare(DecodedSlab& slab) const;
  /// Decode chunk `chunk` (0 .. chunks_per_slab()-1) of the slab at outer index `outer`
  /// (one index per outer dimension, in dimension order) into slab. Takes the netCDF lock
  /// only for the raw read; different chunks may be decoded concurrently into one slab.
  /// Throws InputError (file, variable) when a chunk cannot be read or inflated.
  void decode(const std::vector<std::size_t>& outer, std::size_t chunk, DecodedSlab& slab) const;

  struct Impl;

 private:
  std::unique_ptr<Impl> impl_;
};

/// The decoding of several slabs, shared out chunk by chunk among the threads that help.
class SlabJob {
 public:
  struct Part {
    const ChunkReader* reader;
    std::vector<std::size_t> outer;  // outer index of the slab (see ChunkReader::decode)
    DecodedSlab* slab;               // sized by the constructor
  };
  explicit SlabJob(std::vector<Part> parts);
  /// Decode chunks until none is left to claim, then wait until every chunk is decoded.
  /// Any number of threads may call it; each rethrows the first failure.
  void help_and_wait();

 private:
  std::vector<Part> parts_;
  std::vector<std::pair<std::size_t, std::size_t>> items_;  // (part, chunk)
  std::atomic<std::size_t> next_{0};
  std::mutex mutex_;
  std::condition_variable finished_;
  std::size_t done_ = 0;
  std::exception_ptr failure_;
};

}  // namespace latentlift::io::detail
