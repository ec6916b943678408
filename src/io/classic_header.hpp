// A bounds check of the header of classic NetCDF files (CDF-1, CDF-2, CDF-5) before netCDF-C
// reads it: netCDF-C 4.9.0 can spend minutes in nc_open on a header whose counts were damaged.
#pragma once

#include <string>

namespace latentlift::io::detail {

/// For a file starting with a classic magic number ("CDF" 1, 2 or 5): InputError naming
/// `shown_as` (default: the path) when its header is cut short, or a count, length, type or
/// dimension id in it cannot be right for a file of its size, or a variable's data would end
/// past the end of the file (layout: the NetCDF Classic and 64-bit Offset Format
/// specification, Unidata). Other files are left to nc_open.
void check_classic_header(const std::string& path, const std::string& shown_as = "");

}  // namespace latentlift::io::detail
