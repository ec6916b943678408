// A structural check of the global heap collections of NetCDF-4/HDF5 files before HDF5 reads
// them: HDF5 1.10.8 loops for ever in H5HG_read on a collection whose object list cannot advance
// (a zeroed object header), e.g. under nc_inq_var reading a DIMENSION_LIST attribute.
#pragma once

#include <string>

namespace latentlift::io::detail {

/// For a file starting with the HDF5 signature: InputError naming `shown_as` (default: the path)
/// when a global heap collection ("GCOL", version 1) has an object list that does not advance or
/// runs past the collection or the file (layout: HDF5 File Format Specification, version 2.0,
/// section III.E "Global Heap"). Reads the whole file once (found by its signature: the
/// collections can lie anywhere among the data). Other files are left to nc_open.
void check_global_heaps(const std::string& path, const std::string& shown_as = "");

}  // namespace latentlift::io::detail
