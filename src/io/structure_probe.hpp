// A NetCDF-4/HDF5 file's structure read first in a child process: HDF5 1.10.8 frees invalid
// pointers (H5G__link_release_table, after a link message of a damaged file fails to decode) or
// may loop while netCDF-C opens a damaged file; in a child the crash or hang is contained.
#pragma once

#include <string>

namespace latentlift::io::detail {

/// For a file starting with the HDF5 signature: opens it with netCDF-C in a forked child that
/// inquires every variable and attribute of the root group and exits; InputError naming
/// `shown_as` (default: the path) when the child dies by a signal, fails otherwise than by
/// nc_open's own error, or takes longer than `timeout_s`. The child is an exact copy of this
/// process, so what happens there is what would happen here. Call it with netcdf_mutex() held
/// or while no other thread calls netCDF (a fork copies a lock held by another thread).
void probe_netcdf4_structure(const std::string& path, const std::string& shown_as = "", double timeout_s = 30.0);

}  // namespace latentlift::io::detail
