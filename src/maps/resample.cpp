// Regular target grids and nearest/bilinear resampling plans.
#include "maps/resample.hpp"

#include <algorithm>
#include <cmath>
#include <cstdlib>
#include <limits>
#include <tuple>

#include "maps/spatial_index.hpp"
#include "latentlift/errors.hpp"

namespace latentlift::maps::detail {

namespace {

constexpr double kNaN = std::numeric_limits<double>::quiet_NaN();

struct Axis1D {
  const std::vector<double>* c = nullptr;
  bool regular = false, periodic = false, angular = false;
  double step = 0;

  explicit Axis1D(const std::vector<double>& coords, bool is_angular) : c(&coords), angular(is_angular) {
    std::size_t n = coords.size();
    if (n >= 2) {
      step = (coords.back() - coords.front()) / static_cast<double>(n - 1);
      regular = true;
      for (std::size_t i = 1; i < n; ++i)
        if (std::fabs((coords[i] - coords[i - 1]) - step) > 1e-6 * std::fabs(step)) regular = false;
      periodic = angular && regular && std::fabs(std::fabs(step) * static_cast<double>(n) - 360.0) < 1e-6;
    }
  }

  // Fractional index of v: NaN beyond half a cell outside the ends (never NaN when periodic).
  double index(double v) const {
    const auto& x = *c;
    std::size_t n = x.size();
    if (std::isnan(v)) return kNaN;
    if (angular) {  // the copy of v (mod 360) nearest the middle of the axis
      double mid = 0.5 * (x.front() + x.back());
      v = mid + std::remainder(v - mid, 360.0);
    }
    if (n == 1) return v == x[0] ? 0.0 : kNaN;
    double fi;
    if (regular) {
      fi = (v - x[0]) / step;
    } else {
      bool up = x[n - 1] > x[0];
      auto before = [&](double a, double b) { return up ? a < b : a > b; };
      if (before(v, x[0])) {
        fi = (v - x[0]) / (x[1] - x[0]);
      } else if (before(x[n - 1], v)) {
        fi = static_cast<double>(n - 1) + (v - x[n - 1]) / (x[n - 1] - x[n - 2]);
      } else {
        std::size_t lo = 0, hi = n - 1;  // x[lo] <= v <= x[hi] in axis order
        while (hi - lo > 1) {
          std::size_t m = (lo + hi) / 2;
          if (before(v, x[m])) hi = m; else lo = m;
        }
        fi = static_cast<double>(lo) + (v - x[lo]) / (x[hi] - x[lo]);
      }
    }
    if (periodic) {
      fi = std::fmod(fi, static_cast<double>(n));
      if (fi < 0) fi += static_cast<double>(n);
      return fi;
    }
    if (fi < -0.5 || fi > static_cast<double>(n) - 0.5) return kNaN;
    return fi;
  }
  std::int64_t nearest(double fi) const {
    auto n = static_cast<std::int64_t>(c->size());
    auto i = static_cast<std::int64_t>(std::llround(fi));
    if (periodic) return i % n;
    return std::clamp<std::int64_t>(i, 0, n - 1);
  }
  // Lower neighbour and weight of the upper one; false outside the centres.
  bool linear(double fi, std::int64_t& i0, std::int64_t& i1, double& w) const {
    auto n = static_cast<std::int64_t>(c->size());
    if (std::isnan(fi)) return false;
    if (n == 1) {
      i0 = i1 = 0;
      w = 0;
      return std::fabs(fi) < 1e-9;
    }
    if (!periodic && (fi < -1e-9 || fi > static_cast<double>(n - 1) + 1e-9)) return false;
    i0 = static_cast<std::int64_t>(std::floor(fi));
    if (!periodic) i0 = std::clamp<std::int64_t>(i0, 0, n - 2);
    w = std::clamp(fi - static_cast<double>(i0), 0.0, 1.0);
    i1 = periodic ? (i0 + 1) % n : i0 + 1;
    i0 %= n;
    return true;
  }
};


// Web Mercator and other Mercator maps end at +-85.0511 degrees (the latitude where the square
// world map ends, EPSG:3857 "area of use"); the poles lie at infinity.
using geo::Crs;
using geo::Transformer;

constexpr double kMercatorLimitDeg = 85.05112877980659;

double central_meridian(const Crs& crs) {
  const std::string& proj = crs.proj_string();
  auto at = proj.find("+lon_0=");
  return at == std::string::npos ? 0.0 : std::atof(proj.c_str() + at + 7);
}

// The source grid's extent in crs (west, south, east, north). Longitudes are taken once: a grid
// that goes round the globe (0..360 or -180..180) covers the target's whole longitude window around
// its central meridian; a regional grid across the antimeridian keeps its contiguous span.
std::tuple<double, double, double, double> default_extent(const SourceGrid& source, const Crs& crs) {
  std::vector<double> xs, ys;
  bool global_axis = false;
  if (source.kind == SourceGrid::Kind::rectilinear) {
    // The outline of the source cells (centres widened by half a cell) and an interior lattice.
    auto widened = [](const std::vector<double>& c, double t) {
      double half = c.size() > 1 ? 0.5 * (c[1] - c[0]) : 0.0, half_end = c.size() > 1 ? 0.5 * (c.back() - c[c.size() - 2]) : 0.0;
      double a = c.front() - half, b = c.back() + half_end;
      return a + (b - a) * t;
    };
    const int k = 64;
    for (int p = 0; p <= k; ++p)
      for (int q = 0; q <= k; ++q) {
        if (p != 0 && p != k && q != 0 && q != k && (p % 4 || q % 4)) continue;
        xs.push_back(widened(source.x, p / double(k)));
        ys.push_back(widened(source.y, q / double(k)));
      }
    if (source.crs->is_geographic() && !source.crs->is_rotated_pole())
      global_axis = std::fabs(widened(source.x, 1.0) - widened(source.x, 0.0)) >= 360.0 - 1e-6;
  } else {
    std::size_t stride = std::max<std::size_t>(1, source.lon.size() / 200000);
    for (std::size_t i = 0; i < source.lon.size(); i += stride) {
      xs.push_back(source.lon[i]);
      ys.push_back(source.lat[i]);
    }
  }
  // Longitudes and latitudes on the target's own datum.
  Crs lonlat = crs.geodetic();
  Transformer(*source.crs, lonlat).forward(xs.data(), ys.data(), xs.size());
  std::vector<double> lons;
  double south = HUGE_VAL, north = -HUGE_VAL;
  for (std::size_t i = 0; i < xs.size(); ++i) {
    if (std::isnan(xs[i]) || std::isnan(ys[i])) continue;
    lons.push_back(xs[i] - 360.0 * std::floor((xs[i] + 180.0) / 360.0));  // [-180, 180)
    south = std::min(south, ys[i]);
    north = std::max(north, ys[i]);
  }
  if (lons.empty()) throw UsageError("the source grid does not map into " + crs.name() + "; give --bbox");
  bool mercator = crs.proj_string().find("+proj=merc") != std::string::npos;
  if (mercator) {
    south = std::max(south, -kMercatorLimitDeg);
    north = std::min(north, kMercatorLimitDeg);
  }
  // The longitude window: the complement of the largest gap between sampled longitudes.
  std::sort(lons.begin(), lons.end());
  double gap = lons.front() + 360.0 - lons.back(), start = lons.front();
  for (std::size_t i = 1; i < lons.size(); ++i)
    if (lons[i] - lons[i - 1] > gap) gap = lons[i] - lons[i - 1], start = lons[i];
  bool global = global_axis || gap < 12.0;  // samples are at most 360 / 16 degrees apart on a global grid
  double lon_west = global ? central_meridian(crs) - 180.0 : start, lon_east = global ? lon_west + 360.0 : start + 360.0 - gap;
  if (crs.is_geographic()) return {lon_west, std::max(south, -90.0), lon_east, std::min(north, 90.0)};

  // Projected: the sampled points with their longitudes in the window, plus the window's edges.
  std::vector<double> px, py;
  for (std::size_t i = 0; i < xs.size(); ++i) {
    if (std::isnan(xs[i]) || std::isnan(ys[i])) continue;
    px.push_back(lon_west + std::fmod(std::fmod(xs[i] - lon_west, 360.0) + 360.0, 360.0));
    py.push_back(std::clamp(ys[i], south, north));
  }
  if (global)
    for (int q = 0; q <= 256; ++q) {
      double lat = south + (north - south) * q / 256.0;
      for (double lon : {lon_west + 1e-9, lon_east - 1e-9, central_meridian(crs)}) {
        px.push_back(lon);
        py.push_back(lat);
      }
    }
  Transformer(lonlat, crs).forward(px.data(), py.data(), px.size());
  double west = HUGE_VAL, east = -HUGE_VAL, y0 = HUGE_VAL, y1 = -HUGE_VAL;
  for (std::size_t i = 0; i < px.size(); ++i) {
    if (!std::isfinite(px[i]) || !std::isfinite(py[i])) continue;
    west = std::min(west, px[i]);
    east = std::max(east, px[i]);
    y0 = std::min(y0, py[i]);
    y1 = std::max(y1, py[i]);
  }
  if (!(east >= west)) throw UsageError("the source grid does not map into " + crs.name() + "; give --bbox");
  return {west, y0, east, y1};
}

}  // namespace

TargetGrid make_target_grid(const SourceGrid& source, const geo::Crs& crs, double resolution,
                            const std::optional<std::array<double, 4>>& bbox) {
  if (!(resolution > 0.0) || !std::isfinite(resolution)) throw UsageError("--resolution must be a positive number");
  TargetGrid grid{crs};
  grid.resolution = resolution;
  double west, south, east, north;
  if (bbox) {
    std::tie(west, south, east, north) = std::tuple((*bbox)[0], (*bbox)[1], (*bbox)[2], (*bbox)[3]);
    if (!(east > west && north > south)) throw UsageError("--bbox needs W,S,E,N with W < E and S < N");
  } else {
    std::tie(west, south, east, north) = default_extent(source, crs);
    west = std::floor(west / resolution + 1e-9) * resolution;  // outward to whole cells
    south = std::floor(south / resolution + 1e-9) * resolution;
    east = std::ceil(east / resolution - 1e-9) * resolution;
    north = std::ceil(north / resolution - 1e-9) * resolution;
    if (crs.is_geographic()) {  // snapping never adds a second copy of a longitude or passes a pole
      if (east - west > 360.0) east = west + std::floor(360.0 / resolution + 1e-9) * resolution;
      south = std::max(south, -90.0);
      north = std::min(north, 90.0);
    }
  }
  double nx = std::ceil((east - west) / resolution - 1e-9), ny = std::ceil((north - south) / resolution - 1e-9);
  if (nx < 1 || ny < 1 || nx * ny > 5e7)
    throw UsageError("the target grid would have " + std::to_string(static_cast<long long>(nx)) + " x " +
                     std::to_string(static_cast<long long>(ny)) +
                     " cells; choose a coarser --resolution or a smaller --bbox");
  grid.nx = static_cast<std::size_t>(nx);
  grid.ny = static_cast<std::size_t>(ny);
  grid.west = west;
  grid.south = north - ny * resolution;  // west and north edges kept
  return grid;
}

ResamplePlan::ResamplePlan(const SourceGrid& source, const TargetGrid& target, bool with_bilinear) {
  const std::size_t n = target.nx * target.ny;
  std::vector<double> x(n), y(n);
  for (std::size_t j = 0; j < target.ny; ++j)
    for (std::size_t i = 0; i < target.nx; ++i) {
      x[j * target.nx + i] = target.x(i);
      y[j * target.nx + i] = target.y(j);
    }
  geo::Transformer(target.crs, *source.crs).forward(x.data(), y.data(), n);
  nearest_.assign(n, -1);
  if (source.kind == SourceGrid::Kind::points) {
    if (with_bilinear)
      throw UsageError("bilinear resampling needs a grid with 1-D x/y coordinates; this one has lat/lon per cell "
                       "(use --method nearest)");
    SphereIndex index(source.lon, source.lat);
    double limit = 1.5 * index.typical_spacing();
    for (std::size_t k = 0; k < n; ++k) {
      auto hit = index.nearest(x[k], y[k]);
      if (hit.chord <= limit) nearest_[k] = static_cast<std::int64_t>(hit.index);
    }
    return;
  }
  bool angular = source.crs->is_geographic();
  Axis1D ax(source.x, angular), ay(source.y, false);
  const auto nxs = static_cast<std::int64_t>(source.x.size());
  if (with_bilinear) {
    corners_.assign(n, {-1, -1, -1, -1});
    weights_.assign(n, {0, 0, 0, 0});
  }
  for (std::size_t k = 0; k < n; ++k) {
    double fi = ax.index(x[k]), fj = ay.index(y[k]);
    if (std::isnan(fi) || std::isnan(fj)) continue;
    nearest_[k] = ay.nearest(fj) * nxs + ax.nearest(fi);
    if (!with_bilinear) continue;
    std::int64_t i0, i1, j0, j1;
    double wi, wj;
    if (ax.linear(fi, i0, i1, wi) && ay.linear(fj, j0, j1, wj)) {
      corners_[k] = {j0 * nxs + i0, j0 * nxs + i1, j1 * nxs + i0, j1 * nxs + i1};
      weights_[k] = {(1 - wi) * (1 - wj), wi * (1 - wj), (1 - wi) * wj, wi * wj};
    }
  }
}

void ResamplePlan::nearest(const std::vector<double>& source, std::vector<double>& target) const {
  target.resize(nearest_.size());
  for (std::size_t k = 0; k < nearest_.size(); ++k)
    target[k] = nearest_[k] < 0 ? kNaN : source[static_cast<std::size_t>(nearest_[k])];
}

void ResamplePlan::bilinear(const std::vector<double>& source, std::vector<double>& target) const {
  if (corners_.empty()) throw Error("bilinear weights were not prepared");
  target.resize(corners_.size());
  for (std::size_t k = 0; k < corners_.size(); ++k) {
    const auto& c = corners_[k];
    if (c[0] < 0) {
      target[k] = kNaN;
      continue;
    }
    double sum = 0;
    for (int m = 0; m < 4; ++m) sum += weights_[k][m] * source[static_cast<std::size_t>(c[m])];
    target[k] = sum;  // NaN when any neighbour is missing
  }
}

}  // namespace latentlift::maps::detail
