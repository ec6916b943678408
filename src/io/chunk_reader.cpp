// Direct chunk reading of NetCDF-4 inputs (see chunk_reader.hpp): HDF5 direct chunk read
// (H5Dread_chunk, HDF5 >= 1.10.2) under the netCDF lock, libdeflate and unshuffle outside it.
#include "io/chunk_reader.hpp"

#include <hdf5.h>
#include <libdeflate.h>

#include <algorithm>
#include <cstring>
#include <mutex>

#include "io/netcdf_util.hpp"
#include "latentlift/errors.hpp"

namespace latentlift::io::detail {
namespace {

/// Owner of one HDF5 id, closed with its own H5?close (HDF5 calls need the netCDF lock).
class Hid {
 public:
  using Closer = herr_t (*)(hid_t);
  Hid() = default;
  Hid(hid_t id, Closer closer) : id_(id), closer_(closer) {}
  ~Hid() { reset(); }
  Hid(Hid&& other) noexcept : id_(other.id_), closer_(other.closer_) { other.id_ = -1; }
  Hid& operator=(Hid&& other) noexcept {
    if (this != &other) {
      reset();
      id_ = other.id_;
      closer_ = other.closer_;
      other.id_ = -1;
    }
    return *this;
  }
  Hid(const Hid&) = delete;
  Hid& operator=(const Hid&) = delete;
  hid_t get() const { return id_; }
  bool valid() const { return id_ >= 0; }
  void reset() {
    if (id_ >= 0 && closer_) {
      H5E_BEGIN_TRY { closer_(id_); }
      H5E_END_TRY;
    }
    id_ = -1;
  }

 private:
  hid_t id_ = -1;
  Closer closer_ = nullptr;
};

/// libdeflate decompressor of the calling thread.
libdeflate_decompressor* thread_decompressor() {
  struct Owner {
    libdeflate_decompressor* d = libdeflate_alloc_decompressor();
    ~Owner() { libdeflate_free_decompressor(d); }
  };
  thread_local Owner owner;
  return owner.d;
}

/// Undo HDF5's shuffle filter: byte j of element i was stored at j * n + i.
void unshuffle(const unsigned char* in, std::size_t n_bytes, std::size_t type_size, unsigned char* out) {
  const std::size_t n = n_bytes / type_size;
  if (type_size == 4) {
    const unsigned char *b0 = in, *b1 = in + n, *b2 = in + 2 * n, *b3 = in + 3 * n;
    for (std::size_t i = 0; i < n; ++i) {
      out[4 * i] = b0[i];
      out[4 * i + 1] = b1[i];
      out[4 * i + 2] = b2[i];
      out[4 * i + 3] = b3[i];
    }
  } else {
    for (std::size_t j = 0; j < type_size; ++j)
      for (std::size_t i = 0; i < n; ++i) out[i * type_size + j] = in[j * n + i];
  }
  std::memcpy(out + n * type_size, in + n * type_size, n_bytes - n * type_size);  // HDF5 leaves a remainder as is
}

}  // namespace

struct ChunkReader::Impl {
  std::string path, name, reason;
  Hid file, dataset;
  bool is_float = true;
  std::size_t type_size = 4;
  std::vector<hsize_t> dims, chunk;
  std::vector<bool> outer;
  std::vector<unsigned> filters;        // pipeline order (as applied when writing)
  std::vector<std::size_t> slab_stride;  // element stride in the slab per dimension (0 for outer dims)
  std::size_t slab_size = 1, chunk_elements = 1, n_chunks = 1;
  double fill_value = 0.0;               // of chunks never written

  bool inspect(const std::vector<std::size_t>& lengths, const std::vector<bool>& outer_dims);
};

bool ChunkReader::Impl::inspect(const std::vector<std::size_t>& lengths, const std::vector<bool>& outer_dims) {
  H5E_BEGIN_TRY {
    file = Hid(H5Fopen(path.c_str(), H5F_ACC_RDONLY, H5P_DEFAULT), H5Fclose);
  }
  H5E_END_TRY;
  if (!file.valid()) return reason = "not an HDF5 file", false;
  H5E_BEGIN_TRY { dataset = Hid(H5Dopen2(file.get(), name.c_str(), H5P_DEFAULT), H5Dclose); }
  H5E_END_TRY;
  if (!dataset.valid()) return reason = "no HDF5 dataset of that name", false;

  Hid space(H5Dget_space(dataset.get()), H5Sclose);
  const int ndims = space.valid() ? H5Sget_simple_extent_ndims(space.get()) : -1;
  if (ndims < 1 || static_cast<std::size_t>(ndims) != lengths.size()) return reason = "dimensions differ", false;
  dims.resize(ndims);
  H5Sget_simple_extent_dims(space.get(), dims.data(), nullptr);
  for (int i = 0; i < ndims; ++i)
    if (dims[i] != lengths[i]) return reason = "dimension lengths differ", false;

  Hid type(H5Dget_type(dataset.get()), H5Tclose);
  const hid_t wanted = is_float ? H5T_IEEE_F32LE : H5T_IEEE_F64LE;
  if (!type.valid() || H5Tequal(type.get(), wanted) <= 0) return reason = "not little-endian IEEE float", false;
  type_size = is_float ? 4 : 8;

  Hid dcpl(H5Dget_create_plist(dataset.get()), H5Pclose);
  if (!dcpl.valid() || H5Pget_layout(dcpl.get()) != H5D_CHUNKED) return reason = "not chunked", false;
  chunk.resize(ndims);
  if (H5Pget_chunk(dcpl.get(), ndims, chunk.data()) != ndims) return reason = "unreadable chunk sizes", false;
  const int nfilters = H5Pget_nfilters(dcpl.get());
  bool deflated = false;
  for (int f = 0; f < nfilters; ++f) {
    unsigned flags = 0, values[8];
    std::size_t n_values = 8;
    char filter_name[64];
    const H5Z_filter_t id = H5Pget_filter2(dcpl.get(), f, &flags, &n_values, values, sizeof filter_name,
                                           filter_name, nullptr);
    if (id != H5Z_FILTER_DEFLATE && id != H5Z_FILTER_SHUFFLE) return reason = "a filter other than deflate or shuffle", false;
    deflated = deflated || id == H5Z_FILTER_DEFLATE;
    filters.push_back(static_cast<unsigned>(id));
  }
  if (!deflated) return reason = "not deflated (netCDF-C reads it as fast)", false;
  // Chunks never written read as the fill value, as netCDF-C gives them.
  H5D_fill_value_t fill_status;
  if (H5Pfill_value_defined(dcpl.get(), &fill_status) < 0) return reason = "no fill value", false;
  fill_value = 0.0;
  if (fill_status != H5D_FILL_VALUE_UNDEFINED &&
      H5Pget_fill_value(dcpl.get(), H5T_NATIVE_DOUBLE, &fill_value) < 0)
    return reason = "unreadable fill value", false;

  outer = outer_dims;
  slab_stride.assign(ndims, 0);
  for (int i = ndims; i-- > 0;) {
    chunk_elements *= chunk[i];
    if (outer[i]) continue;
    slab_stride[i] = slab_size;
    slab_size *= dims[i];
    n_chunks *= (dims[i] + chunk[i] - 1) / chunk[i];
  }
  return true;
}

ChunkReader::ChunkReader(const std::string& path, const std::string& name, const std::vector<std::size_t>& lengths,
                         const std::vector<bool>& outer_dims, bool is_float)
    : impl_(std::make_unique<Impl>()) {
  impl_->path = path;
  impl_->name = name;
  impl_->is_float = is_float;
  if (!impl_->inspect(lengths, outer_dims)) {
    impl_->dataset.reset();
    impl_->file.reset();
  }
}

ChunkReader::~ChunkReader() {
  if (!impl_->file.valid()) return;  // nothing open (the constructor may run under the lock)
  std::lock_guard<std::mutex> lock(netcdf_mutex());
  impl_->dataset.reset();
  impl_->file.reset();
}

bool ChunkReader::supports() const { return impl_->dataset.valid(); }
const std::string& ChunkReader::reason() const { return impl_->reason; }
std::size_t ChunkReader::chunks_per_slab() const { return impl_->n_chunks; }

void ChunkReader::prepare(DecodedSlab& slab) const {
  slab.is_float = impl_->is_float;
  if (slab.is_float) {
    slab.doubles.clear();
    slab.floats.resize(impl_->slab_size);
  } else {
    slab.floats.clear();
    slab.doubles.resize(impl_->slab_size);
  }
}

void ChunkReader::decode(const std::vector<std::size_t>& outer_index, std::size_t chunk_number,
                         DecodedSlab& slab) const {
  const Impl& m = *impl_;
  const std::size_t ndims = m.dims.size();
  // Origin of the chunk (elements) and, for outer dimensions, the index inside it.
  std::vector<hsize_t> origin(ndims);
  std::vector<std::size_t> inner_fixed(ndims, 0), extent(ndims, 1);
  std::size_t rest = chunk_number, outer_seen = 0;
  for (std::size_t i = 0; i < ndims; ++i)
    if (m.outer[i]) {
      const std::size_t index = outer_index.at(outer_seen++);
      origin[i] = index / m.chunk[i] * m.chunk[i];
      inner_fixed[i] = index % m.chunk[i];
    }
  for (std::size_t i = ndims; i-- > 0;) {
    if (m.outer[i]) continue;
    const std::size_t per_dim = (m.dims[i] + m.chunk[i] - 1) / m.chunk[i];
    origin[i] = (rest % per_dim) * m.chunk[i];
    rest /= per_dim;
    extent[i] = std::min<std::size_t>(m.chunk[i], m.dims[i] - origin[i]);
  }

  const std::size_t chunk_bytes = m.chunk_elements * m.type_size;
  thread_local std::vector<unsigned char> raw, work_a, work_b;
  uint32_t filter_mask = 0;
  hsize_t stored = 0;
  {
    std::lock_guard<std::mutex> lock(netcdf_mutex());
    herr_t status = -1;
    H5E_BEGIN_TRY {
      status = H5Dget_chunk_storage_size(m.dataset.get(), origin.data(), &stored);
      if (status >= 0 && stored > 0) {
        raw.resize(stored);
        status = H5Dread_chunk(m.dataset.get(), H5P_DEFAULT, origin.data(), &filter_mask, raw.data());
      }
    }
    H5E_END_TRY;
    if (status < 0) throw InputError(m.path, m.name, "readable compressed chunks (is the file truncated?)");
  }
  const unsigned char* data = raw.data();
  std::size_t size = raw.size();
  if (stored == 0) {  // never written: the fill value
    work_a.resize(chunk_bytes);
    for (std::size_t i = 0; i < m.chunk_elements; ++i) {
      if (m.is_float) {
        const float value = static_cast<float>(m.fill_value);
        std::memcpy(work_a.data() + i * 4, &value, 4);
      } else {
        std::memcpy(work_a.data() + i * 8, &m.fill_value, 8);
      }
    }
    data = work_a.data();
    size = chunk_bytes;
    filter_mask = ~0u;  // no filter to undo
  }
  // Undo the filters in reverse order, skipping those the mask says were not applied.
  for (std::size_t f = m.filters.size(); f-- > 0;) {
    if (filter_mask & (1u << f)) continue;
    std::vector<unsigned char>& out = (data == work_a.data()) ? work_b : work_a;
    out.resize(chunk_bytes);
    if (m.filters[f] == H5Z_FILTER_DEFLATE) {
      std::size_t actual = 0;
      if (libdeflate_zlib_decompress(thread_decompressor(), data, size, out.data(), chunk_bytes, &actual) !=
              LIBDEFLATE_SUCCESS ||
          actual != chunk_bytes)
        throw InputError(m.path, m.name, "deflated chunks that inflate to their size (is the file damaged?)");
    } else {
      if (size != chunk_bytes) throw InputError(m.path, m.name, "chunks of " + std::to_string(chunk_bytes) + " bytes");
      unshuffle(data, size, m.type_size, out.data());
    }
    data = out.data();
    size = chunk_bytes;
  }
  if (size != chunk_bytes) throw InputError(m.path, m.name, "chunks of " + std::to_string(chunk_bytes) + " bytes");

  // Copy the part of the chunk inside the dataset into the slab, runs along the last dimension.
  unsigned char* dst = slab.is_float ? reinterpret_cast<unsigned char*>(slab.floats.data())
                                     : reinterpret_cast<unsigned char*>(slab.doubles.data());
  std::vector<std::size_t> chunk_stride(ndims, 1);
  for (std::size_t i = ndims - 1; i-- > 0;) chunk_stride[i] = chunk_stride[i + 1] * m.chunk[i + 1];
  const std::size_t last = ndims - 1;
  const std::size_t run = extent[last] * m.type_size;
  std::vector<std::size_t> at(ndims, 0);  // position inside the chunk's extent (outer dims: fixed)
  for (;;) {
    std::size_t src_index = 0, dst_index = 0;
    for (std::size_t i = 0; i < ndims; ++i) {
      const std::size_t local = m.outer[i] ? inner_fixed[i] : at[i];
      src_index += local * chunk_stride[i];
      if (!m.outer[i]) dst_index += (origin[i] + local) * m.slab_stride[i];
    }
    std::memcpy(dst + dst_index * m.type_size, data + src_index * m.type_size, run);
    std::size_t i = last;
    for (;;) {
      if (i == 0) return;
      --i;
      if (++at[i] < extent[i]) break;
      at[i] = 0;
    }
  }
}

SlabJob::SlabJob(std::vector<Part> parts) : parts_(std::move(parts)) {
  for (std::size_t p = 0; p < parts_.size(); ++p) {
    parts_[p].reader->prepare(*parts_[p].slab);
    for (std::size_t c = 0; c < parts_[p].reader->chunks_per_slab(); ++c) items_.emplace_back(p, c);
  }
}

void SlabJob::help_and_wait() {
  for (;;) {
    const std::size_t item = next_.fetch_add(1);
    if (item >= items_.size()) break;
    const Part& part = parts_[items_[item].first];
    try {
      part.reader->decode(part.outer, items_[item].second, *part.slab);
    } catch (...) {
      std::lock_guard<std::mutex> lock(mutex_);
      if (!failure_) failure_ = std::current_exception();
    }
    std::lock_guard<std::mutex> lock(mutex_);
    if (++done_ == items_.size()) finished_.notify_all();
  }
  std::unique_lock<std::mutex> lock(mutex_);
  finished_.wait(lock, [this] { return done_ == items_.size(); });
  if (failure_) std::rethrow_exception(failure_);
}

}  // namespace latentlift::io::detail
