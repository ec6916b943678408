#include "io/classic_header.hpp"

#include <algorithm>
#include <cstdint>
#include <fstream>
#include <string>
#include <utility>
#include <vector>

#include "latentlift/errors.hpp"

namespace latentlift::io::detail {

namespace {

// Tags and type sizes of the NetCDF Classic and 64-bit Offset Format specification (Unidata;
// CDF-5 types and 8-byte counts from its CDF-5 addendum).
constexpr std::uint32_t kDimensionTag = 0x0A, kVariableTag = 0x0B, kAttributeTag = 0x0C;

std::uint64_t type_size(std::uint64_t type, int version) {
  switch (type) {
    case 1: case 2: return 1;  // byte, char
    case 3: return 2;          // short
    case 4: case 5: return 4;  // int, float
    case 6: return 8;          // double
    case 7: return version == 5 ? 1 : 0;   // ubyte (CDF-5 only)
    case 8: return version == 5 ? 2 : 0;   // ushort
    case 9: return version == 5 ? 4 : 0;   // uint
    case 10: case 11: return version == 5 ? 8 : 0;  // int64, uint64
    default: return 0;
  }
}

/// a * b, or `limit` + 1 when the product exceeds `limit` (no overflow).
std::uint64_t product_up_to(std::uint64_t a, std::uint64_t b, std::uint64_t limit) {
  if (a == 0 || b == 0) return 0;
  return a > limit / b ? limit + 1 : a * b;
}

/// Raised when the header is larger than what was read and the file is too: no verdict.
struct HeaderTooLarge {};

class HeaderReader {
 public:
  HeaderReader(std::ifstream& in, std::uint64_t file_size, int version, std::string shown_as)
      : in_(in), file_size_(file_size), version_(version), shown_as_(std::move(shown_as)) {}

  void check() {
    // numrecs: any value (0xFFFFFFFF.. while a writer streams); checked against the data below.
    const std::uint64_t numrecs = version_ == 5 ? u64() : u32();
    const bool streaming = numrecs == (version_ == 5 ? ~std::uint64_t{0} : 0xFFFFFFFFu);
    std::uint64_t tag = u32(), n_dims = count();
    std::vector<std::uint64_t> lengths;  // one per dimension; each costs >= 8 header bytes
    if (!(tag == 0 && n_dims == 0)) {
      if (tag != kDimensionTag) fail("dimension list tag");
      if (n_dims > file_size_ / 8) fail(std::to_string(n_dims) + " dimensions");
      for (std::uint64_t d = 0; d < n_dims; ++d) {
        name("dimension");
        lengths.push_back(count());  // 0: the record dimension
      }
    }
    attributes();
    tag = u32();
    const std::uint64_t n_vars = count();
    if (tag == 0 && n_vars == 0) return;
    if (tag != kVariableTag) fail("variable list tag");
    if (n_vars > file_size_ / 16) fail(std::to_string(n_vars) + " variables");
    struct RecordVariable {
      std::uint64_t begin, bytes_per_record;
    };
    std::vector<RecordVariable> records;
    std::uint64_t record_bytes = 0;  // a lower bound of the record size (padding not counted)
    for (std::uint64_t v = 0; v < n_vars; ++v) {
      name("variable");
      const std::uint64_t rank = count();
      if (rank > 1024) fail("a variable of " + std::to_string(rank) + " dimensions");
      std::vector<std::uint64_t> dims;
      for (std::uint64_t r = 0; r < rank; ++r) {
        dims.push_back(count());
        if (dims.back() >= n_dims) fail("a variable on a dimension that does not exist");
      }
      attributes();
      const std::uint64_t type = u32();
      const std::uint64_t size = type_size(type, version_);
      if (size == 0) fail("variable type " + std::to_string(type));
      count();  // vsize (clipped by the format for large variables): the size is computed below
      const std::uint64_t begin = version_ == 1 ? u32() : u64();
      if (begin > file_size_) fail("variable data beginning past the end of the file");
      const bool record = !dims.empty() && lengths[dims[0]] == 0;
      std::uint64_t bytes = size;
      for (std::size_t r = record ? 1 : 0; r < dims.size(); ++r) bytes = product_up_to(bytes, lengths[dims[r]], file_size_);
      if (record) {
        records.push_back({begin, bytes});
        record_bytes = std::min(record_bytes + bytes, file_size_ + 1);
      } else if (bytes > file_size_ - begin) {
        fail("its variables' data end past the end of the file (truncated?)");
      }
    }
    if (streaming || numrecs == 0) return;
    for (const RecordVariable& variable : records) {
      // The last record of this variable begins (numrecs - 1) records after its first.
      const std::uint64_t before_last = product_up_to(numrecs - 1, record_bytes, file_size_);
      if (before_last > file_size_ - variable.begin ||
          variable.bytes_per_record > file_size_ - variable.begin - before_last)
        fail(std::to_string(numrecs) + " records end past the end of the file (truncated?)");
    }
  }

 private:
  [[noreturn]] void fail(const std::string& what) const {
    throw InputError(shown_as_, "", "a readable NetCDF file (damaged classic header: " + what + ")");
  }
  std::uint64_t u32() { return big_endian(4); }
  std::uint64_t u64() { return big_endian(8); }
  /// A count (nelems, lengths, dimension ids): 8 bytes in CDF-5, 4 otherwise.
  std::uint64_t count() { return version_ == 5 ? u64() : u32(); }
  std::uint64_t big_endian(int n) {
    need(static_cast<std::uint64_t>(n));
    std::uint64_t v = 0;
    for (int i = 0; i < n; ++i) v = (v << 8) | bytes_[at_++];
    return v;
  }
  /// n items of `size` bytes each, padded to 4 bytes; they must fit in the rest of the file.
  void skip_padded(std::uint64_t n, std::uint64_t size, const char* what) {
    if (n > (file_size_ - at_) / size) fail(std::string(what) + " longer than the file");
    const std::uint64_t bytes = (n * size + 3) / 4 * 4;
    need(bytes);
    at_ += bytes;
  }
  void name(const char* what) {
    const std::uint64_t length = count();
    if (length == 0 || length > 256)  // NC_MAX_NAME
      fail(std::string("a ") + what + " name of " + std::to_string(length) + " bytes");
    skip_padded(length, 1, "a name");
  }
  void attributes() {
    const std::uint64_t tag = u32(), n = count();
    if (tag == 0 && n == 0) return;
    if (tag != kAttributeTag) fail("attribute list tag");
    if (n > file_size_ / 12) fail(std::to_string(n) + " attributes");
    for (std::uint64_t a = 0; a < n; ++a) {
      name("attribute");
      const std::uint64_t type = u32();
      const std::uint64_t size = type_size(type, version_);
      if (size == 0) fail("attribute type " + std::to_string(type));
      skip_padded(count(), size, "an attribute");
    }
  }
  /// Makes n more bytes available from the file, read in growing pieces (most headers are a
  /// few kB; a large file's data is never read).
  void need(std::uint64_t n) {
    if (n <= bytes_.size() - at_) return;
    if (n > file_size_ - at_) fail("it ends before its last entry (truncated?)");
    const std::uint64_t want = std::min<std::uint64_t>(file_size_, std::max<std::uint64_t>(at_ + n, 2 * bytes_.size() + 65536));
    if (want > kMaxHeaderBytes) throw HeaderTooLarge{};
    const std::size_t old = bytes_.size();
    bytes_.resize(want);
    in_.clear();
    in_.seekg(static_cast<std::streamoff>(old));
    in_.read(reinterpret_cast<char*>(bytes_.data() + old), static_cast<std::streamsize>(want - old));
    if (static_cast<std::uint64_t>(in_.gcount()) != want - old) throw HeaderTooLarge{};  // unreadable: nc_open says why
  }

  static constexpr std::uint64_t kMaxHeaderBytes = 64u * 1024 * 1024;
  std::ifstream& in_;
  std::vector<unsigned char> bytes_ = std::vector<unsigned char>(4);  // the magic number, already checked
  std::uint64_t file_size_;
  int version_;
  std::string shown_as_;
  std::uint64_t at_ = 4;  // after the magic number
};

}  // namespace

void check_classic_header(const std::string& path, const std::string& shown_as) {
  std::ifstream in(path, std::ios::binary | std::ios::ate);
  if (!in) return;  // nc_open reports what is wrong with the file
  const std::streamoff end = in.tellg();
  if (end < 4) return;
  in.seekg(0);
  char magic[4] = {0, 0, 0, 0};
  in.read(magic, 4);
  if (!(magic[0] == 'C' && magic[1] == 'D' && magic[2] == 'F' && (magic[3] == 1 || magic[3] == 2 || magic[3] == 5)))
    return;
  try {
    HeaderReader(in, static_cast<std::uint64_t>(end), magic[3], shown_as.empty() ? path : shown_as).check();
  } catch (const HeaderTooLarge&) {
    // A header beyond 64 MiB: left to netCDF-C.
  }
}

}  // namespace latentlift::io::detail
