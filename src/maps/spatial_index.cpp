// A k-d tree over unit vectors: nearest source cell of unstructured grids.
#include "maps/spatial_index.hpp"

#include <algorithm>
#include <cmath>
#include <limits>

namespace latentlift::maps::detail {

std::array<double, 3> unit_vector(double lon_deg, double lat_deg) {
  constexpr double rad = 3.14159265358979323846 / 180.0;
  double lon = lon_deg * rad, lat = lat_deg * rad;
  return {std::cos(lat) * std::cos(lon), std::cos(lat) * std::sin(lon), std::sin(lat)};
}

SphereIndex::SphereIndex(const std::vector<double>& lon_deg, const std::vector<double>& lat_deg) {
  points_.resize(lon_deg.size());
  for (std::size_t i = 0; i < lon_deg.size(); ++i) {
    if (std::isnan(lon_deg[i]) || std::isnan(lat_deg[i])) continue;
    points_[i] = unit_vector(lon_deg[i], lat_deg[i]);
    order_.push_back(i);
  }
  build(0, order_.size(), 0);
}

void SphereIndex::build(std::size_t lo, std::size_t hi, int depth) {
  if (hi - lo <= 1) return;
  std::size_t mid = lo + (hi - lo) / 2;
  int axis = depth % 3;
  std::nth_element(order_.begin() + lo, order_.begin() + mid, order_.begin() + hi,
                   [&](std::size_t a, std::size_t b) { return points_[a][axis] < points_[b][axis]; });
  build(lo, mid, depth + 1);
  build(mid + 1, hi, depth + 1);
}

void SphereIndex::search(std::size_t lo, std::size_t hi, int depth, const std::array<double, 3>& q,
                         std::size_t exclude, Hit& best, double& best_d2) const {
  if (lo >= hi) return;
  std::size_t mid = lo + (hi - lo) / 2;
  const auto& p = points_[order_[mid]];
  double d2 = (p[0] - q[0]) * (p[0] - q[0]) + (p[1] - q[1]) * (p[1] - q[1]) + (p[2] - q[2]) * (p[2] - q[2]);
  if (order_[mid] != exclude && d2 < best_d2) {
    best_d2 = d2;
    best.index = order_[mid];
  }
  int axis = depth % 3;
  double diff = q[axis] - p[axis];
  if (diff < 0) {
    search(lo, mid, depth + 1, q, exclude, best, best_d2);
    if (diff * diff < best_d2) search(mid + 1, hi, depth + 1, q, exclude, best, best_d2);
  } else {
    search(mid + 1, hi, depth + 1, q, exclude, best, best_d2);
    if (diff * diff < best_d2) search(lo, mid, depth + 1, q, exclude, best, best_d2);
  }
}

SphereIndex::Hit SphereIndex::nearest(double lon_deg, double lat_deg) const {
  Hit best{0, std::numeric_limits<double>::infinity()};
  double best_d2 = std::numeric_limits<double>::infinity();
  if (std::isnan(lon_deg) || std::isnan(lat_deg)) return best;
  search(0, order_.size(), 0, unit_vector(lon_deg, lat_deg), std::numeric_limits<std::size_t>::max(), best, best_d2);
  best.chord = std::sqrt(best_d2);
  return best;
}

double SphereIndex::typical_spacing() const {
  if (order_.size() < 2) return std::numeric_limits<double>::infinity();
  std::vector<double> spacing;
  std::size_t step = std::max<std::size_t>(1, order_.size() / 20000);  // a sample is enough for a median
  for (std::size_t k = 0; k < order_.size(); k += step) {
    Hit best{0, 0};
    double best_d2 = std::numeric_limits<double>::infinity();
    search(0, order_.size(), 0, points_[order_[k]], order_[k], best, best_d2);
    spacing.push_back(std::sqrt(best_d2));
  }
  std::nth_element(spacing.begin(), spacing.begin() + spacing.size() / 2, spacing.end());
  return spacing[spacing.size() / 2];
}

}  // namespace latentlift::maps::detail
