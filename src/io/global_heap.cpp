#include "io/global_heap.hpp"

#include <fcntl.h>
#include <unistd.h>

#include <cstdint>
#include <cstring>
#include <string>
#include <vector>

#include "latentlift/errors.hpp"

namespace latentlift::io::detail {

namespace {

constexpr unsigned char kHdf5Signature[8] = {0x89, 'H', 'D', 'F', '\r', '\n', 0x1a, '\n'};
// "GCOL", version 1, three reserved zero bytes: the start of every global heap collection.
constexpr unsigned char kCollectionSignature[8] = {'G', 'C', 'O', 'L', 1, 0, 0, 0};
constexpr std::uint64_t kMaxCollectionBytes = 256u * 1024 * 1024;

/// Closes a POSIX file descriptor.
class Fd {
 public:
  explicit Fd(int fd) : fd_(fd) {}
  ~Fd() {
    if (fd_ >= 0) ::close(fd_);
  }
  Fd(const Fd&) = delete;
  Fd& operator=(const Fd&) = delete;
  int get() const { return fd_; }

 private:
  int fd_;
};

bool read_at(int fd, std::uint64_t offset, unsigned char* out, std::size_t n) {
  std::size_t done = 0;
  while (done < n) {
    const ssize_t got = ::pread(fd, out + done, n - done, static_cast<off_t>(offset + done));
    if (got <= 0) return false;
    done += static_cast<std::size_t>(got);
  }
  return true;
}

std::uint64_t little_endian(const unsigned char* p, int n) {
  std::uint64_t v = 0;
  for (int i = n - 1; i >= 0; --i) v = (v << 8) | p[i];
  return v;
}

/// Size of lengths from the superblock at offset 0 (versions 0-1: byte 14; 2-3: byte 10).
int length_size(int fd) {
  unsigned char super[16] = {0};
  if (!read_at(fd, 0, super, sizeof super)) return 8;
  const int version = super[8];
  const int size = version <= 1 ? super[14] : super[10];
  return size == 2 || size == 4 || size == 8 ? size : 8;
}

/// What is wrong with the collection at `offset`, or "" (its object walk as HDF5 1.10.8 does it
/// in H5HG__cache_heap_deserialize: object 0 is free space whose size includes its header).
std::string collection_defect(int fd, std::uint64_t offset, std::uint64_t file_size, int sizeof_length) {
  const std::uint64_t header = 8 + static_cast<std::uint64_t>(sizeof_length);
  const std::uint64_t object_header = 8 + static_cast<std::uint64_t>(sizeof_length);
  std::vector<unsigned char> head(header);
  if (!read_at(fd, offset, head.data(), head.size())) return "a global heap cut short";
  const std::uint64_t size = little_endian(head.data() + 8, sizeof_length);
  if (size < header || size > file_size - offset) return "a global heap of " + std::to_string(size) + " bytes";
  if (size > kMaxCollectionBytes) return "";  // not read here
  std::vector<unsigned char> heap(size);
  if (!read_at(fd, offset, heap.data(), heap.size())) return "a global heap cut short";
  std::uint64_t at = header;
  while (at < size) {
    if (object_header > size - at) break;  // the rest is free space too small for a header
    const std::uint64_t index = little_endian(heap.data() + at, 2);
    const std::uint64_t object = little_endian(heap.data() + at + 8, sizeof_length);
    std::uint64_t need = object;
    if (index > 0) need = object > size ? size + 1 : object_header + (object + 7) / 8 * 8;
    if (need == 0) return "a global heap object of 0 bytes";
    if (need > size - at) return "a global heap object larger than its heap";
    at += need;
  }
  return "";
}

}  // namespace

void check_global_heaps(const std::string& path, const std::string& shown_as) {
  Fd fd(::open(path.c_str(), O_RDONLY | O_CLOEXEC));
  if (fd.get() < 0) return;  // nc_open reports what is wrong with the file
  unsigned char signature[8] = {0};
  if (!read_at(fd.get(), 0, signature, sizeof signature) || std::memcmp(signature, kHdf5Signature, 8) != 0) return;
  const off_t end = ::lseek(fd.get(), 0, SEEK_END);
  if (end <= 0) return;
  const std::uint64_t file_size = static_cast<std::uint64_t>(end);
  const int sizeof_length = length_size(fd.get());

  constexpr std::size_t kPiece = 1u << 20, kOverlap = sizeof kCollectionSignature - 1;
  std::vector<unsigned char> buffer(kPiece + kOverlap);
  std::uint64_t base = 0;  // file offset of buffer[0]
  std::size_t kept = 0;    // bytes carried over from the previous piece
  while (base + kept < file_size) {
    const std::size_t want = static_cast<std::size_t>(std::min<std::uint64_t>(kPiece, file_size - base - kept));
    if (!read_at(fd.get(), base + kept, buffer.data() + kept, want)) return;
    const std::size_t filled = kept + want;
    const unsigned char* from = buffer.data();
    while (const void* hit = ::memmem(from, filled - static_cast<std::size_t>(from - buffer.data()),
                                      kCollectionSignature, sizeof kCollectionSignature)) {
      const auto* found = static_cast<const unsigned char*>(hit);
      const std::uint64_t offset = base + static_cast<std::uint64_t>(found - buffer.data());
      const std::string defect = collection_defect(fd.get(), offset, file_size, sizeof_length);
      if (!defect.empty())
        throw InputError(shown_as.empty() ? path : shown_as, "",
                         "a readable NetCDF file: this NetCDF-4/HDF5 file is damaged (" + defect + " at byte " +
                             std::to_string(offset) + ")");
      from = found + 1;
    }
    kept = std::min(kOverlap, filled);
    std::memmove(buffer.data(), buffer.data() + filled - kept, kept);
    base += filled - kept;
  }
}

}  // namespace latentlift::io::detail
