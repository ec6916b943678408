// Internal: regular target grids and the resampling plan from a source grid onto one.
#pragma once

#include <array>
#include <cstdint>
#include <optional>
#include <vector>

#include "maps/source_grid.hpp"
#include "latentlift/crs.hpp"

namespace latentlift::maps::detail {

/// A regular grid of nx x ny cells in crs; rows run south to north (ascending y).
struct TargetGrid {
  geo::Crs crs;
  double west = 0, south = 0, resolution = 0;
  std::size_t nx = 0, ny = 0;
  double x(std::size_t i) const { return west + (static_cast<double>(i) + 0.5) * resolution; }
  double y(std::size_t j) const { return south + (static_cast<double>(j) + 0.5) * resolution; }
  double east() const { return west + static_cast<double>(nx) * resolution; }
  double north() const { return south + static_cast<double>(ny) * resolution; }
};

/// The target grid: bbox (west, south, east, north edges; west and north kept, east/south widened to
/// whole cells) or, without bbox, the source grid's extent in crs snapped outward to multiples of resolution.
TargetGrid make_target_grid(const SourceGrid& source, const geo::Crs& crs, double resolution,
                            const std::optional<std::array<double, 4>>& bbox);

/// Which source cells feed each target cell.
class ResamplePlan {
 public:
  /// with_bilinear: also prepare bilinear weights (rectilinear sources only; UsageError otherwise).
  ResamplePlan(const SourceGrid& source, const TargetGrid& target, bool with_bilinear);
  /// Nearest source cell; NaN outside the source grid (beyond half a cell, or 1.5 typical spacings for points).
  void nearest(const std::vector<double>& source, std::vector<double>& target) const;
  /// Bilinear in the source's native coordinates; NaN outside the cell centres or next to a missing value.
  void bilinear(const std::vector<double>& source, std::vector<double>& target) const;
  bool has_bilinear() const { return !corners_.empty(); }

 private:
  std::vector<std::int64_t> nearest_;
  std::vector<std::array<std::int64_t, 4>> corners_;
  std::vector<std::array<double, 4>> weights_;
};

}  // namespace latentlift::maps::detail
