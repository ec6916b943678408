// Internal: nearest-neighbour search over points on the sphere (a k-d tree on unit vectors),
// for unstructured and curvilinear grids.
#pragma once

#include <array>
#include <cstddef>
#include <vector>

namespace latentlift::maps::detail {

class SphereIndex {
 public:
  /// Points given as longitude/latitude in degrees; NaN points are left out.
  SphereIndex(const std::vector<double>& lon_deg, const std::vector<double>& lat_deg);
  struct Hit {
    std::size_t index;       // into the input arrays
    double chord;            // chord distance on the unit sphere (radians for short distances)
  };
  /// The nearest point; chord is +inf when the index is empty.
  Hit nearest(double lon_deg, double lat_deg) const;
  /// Median over the points of the distance to their nearest other point (chord, unit sphere).
  double typical_spacing() const;
  std::size_t size() const { return order_.size(); }

 private:
  void build(std::size_t lo, std::size_t hi, int depth);
  void search(std::size_t lo, std::size_t hi, int depth, const std::array<double, 3>& q, std::size_t exclude,
              Hit& best, double& best_d2) const;
  std::vector<std::array<double, 3>> points_;  // unit vectors, by input index
  std::vector<std::size_t> order_;             // implicit balanced tree over input indices
};

/// Unit vector of a longitude/latitude in degrees.
std::array<double, 3> unit_vector(double lon_deg, double lat_deg);

}  // namespace latentlift::maps::detail
