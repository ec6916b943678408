// Mergeable per-grid-point accumulators.
// Mean and variance: Welford (1962, Technometrics 4, 419-420) for one value at a
// time; Chan, Golub & LeVeque (1979, "Updating formulae and a pairwise algorithm
// for computing sample variances", Stanford STAN-CS-79-773) to merge two partial
// results: delta = mean_b - mean_a, n = n_a + n_b,
// mean = mean_a + delta n_b / n, M2 = M2_a + M2_b + delta^2 n_a n_b / n.
#include <algorithm>
#include <cmath>
#include <cstring>
#include <limits>

#include "latentlift/climatology.hpp"
#include "latentlift/errors.hpp"

namespace latentlift::climatology {

namespace {

// Edges from (step, upper) runs starting at 0: e.g. {{2, 20}, {5, 100}} -> 0 2 .. 20 25 .. 100.
std::vector<double> runs(std::initializer_list<std::pair<double, double>> steps) {
  std::vector<double> edges{0.0};
  for (const auto& [step, upper] : steps) {
    const double start = edges.back();
    const int n = static_cast<int>(std::lround((upper - start) / step));
    for (int i = 1; i <= n; ++i) edges.push_back(start + i * step);
  }
  return edges;
}

}  // namespace

const std::array<FieldSpec, kFieldCount>& field_specs() {
  // Bins are finer where values are common; the resolution of the percentiles is the bin width.
  static const std::array<FieldSpec, kFieldCount> specs = {{
      {"latent_layer_depth", "hPa", "total depth of latently unstable layers",
       runs({{2, 20}, {5, 100}, {10, 300}})},
      {"mu_cape", "J kg-1", "CAPE of the most-unstable parcel",
       runs({{10, 100}, {50, 1000}, {100, 4000}, {250, 8000}})},
      {"mu_cin", "J kg-1", "CIN of the most-unstable parcel",
       runs({{2, 20}, {5, 100}, {10, 300}, {50, 1000}})},
      {"mu_lift_to_lfc", "hPa", "lift needed to bring the most-unstable parcel to its LFC",
       runs({{2, 20}, {5, 100}, {10, 300}, {25, 800}})},
      {"easiest_lift", "hPa", "least lift needed over the latently unstable parcels",
       runs({{2, 20}, {5, 100}, {10, 300}, {25, 800}})},
  }};
  return specs;
}

int bin_of(const std::vector<double>& edges, double v) {
  if (v <= edges.front()) return 0;
  if (v > edges.back()) return static_cast<int>(edges.size());
  // first edge >= v: v lies in (e_{k-1}, e_k] -> bin k
  return static_cast<int>(std::lower_bound(edges.begin(), edges.end(), v) - edges.begin());
}

namespace {

// Every edge of a field is a multiple of its smallest step u, so the interval ((j-1)u, ju]
// lies inside one bin: table[j] is that bin. ceil(v/u) picks j; two comparisons correct
// any rounding, so the result equals bin_of exactly.
struct BinTable {
  double inverse_unit = 1.0;
  std::vector<int> table;
};

const std::array<BinTable, kFieldCount>& bin_tables() {
  static const std::array<BinTable, kFieldCount> tables = [] {
    std::array<BinTable, kFieldCount> t;
    for (int f = 0; f < kFieldCount; ++f) {
      const auto& edges = field_specs()[f].edges;
      double unit = edges[1] - edges[0];
      for (std::size_t k = 1; k < edges.size(); ++k) unit = std::min(unit, edges[k] - edges[k - 1]);
      const std::size_t n = static_cast<std::size_t>(std::lround(edges.back() / unit)) + 2;
      t[f].inverse_unit = 1.0 / unit;
      t[f].table.resize(n);
      for (std::size_t j = 0; j < n; ++j) t[f].table[j] = bin_of(edges, static_cast<double>(j) * unit);
    }
    return t;
  }();
  return tables;
}

}  // namespace

int field_bin(int f, double v) {
  const auto& edges = field_specs()[f].edges;
  if (v <= edges.front()) return 0;
  const int last = static_cast<int>(edges.size());  // the overflow bin
  if (v > edges.back()) return last;
  const BinTable& t = bin_tables()[f];
  const double q = v * t.inverse_unit;
  std::size_t j = static_cast<std::size_t>(q);
  if (static_cast<double>(j) < q) ++j;
  int k = t.table[std::min(j, t.table.size() - 1)];
  while (k < last && v > edges[k]) ++k;
  while (k > 1 && v <= edges[k - 1]) --k;
  return k;
}

double histogram_percentile(const std::uint32_t* counts, const std::vector<double>& edges,
                            double max_value, double q) {
  const int bins = static_cast<int>(edges.size()) + 1;
  std::uint64_t total = 0;
  for (int k = 0; k < bins; ++k) total += counts[k];
  if (total == 0) return std::numeric_limits<double>::quiet_NaN();
  const double rank = q / 100.0 * static_cast<double>(total);
  std::uint64_t below = 0;
  for (int k = 0; k < bins; ++k) {
    const std::uint64_t cum = below + counts[k];
    if (counts[k] > 0 && static_cast<double>(cum) >= rank) {
      if (k == 0) return std::min(edges.front(), max_value);
      const double lo = edges[k - 1];
      const double hi = k < bins - 1 ? edges[k] : max_value;
      const double p = lo + (rank - static_cast<double>(below)) / counts[k] * (hi - lo);
      return std::min(p, max_value);
    }
    below = cum;
  }
  return max_value;
}

double standard_deviation(std::uint32_t n, double m2) {
  if (n < 2) return std::numeric_limits<double>::quiet_NaN();
  return std::sqrt(std::max(m2, 0.0) / (n - 1));
}

Accumulator::Accumulator(GroupBy group_by, std::size_t n_points, int n_levels)
    : group_by_(group_by), groups_(group_count(group_by)), points_(n_points), levels_(n_levels) {
  const std::size_t cells = static_cast<std::size_t>(groups_) * points_;
  count.assign(cells, 0);
  latent_count.assign(cells, 0);
  real_latent_count.assign(cells, 0);
  for (int f = 0; f < kFieldCount; ++f) {
    n[f].assign(cells, 0);
    mean[f].assign(cells, 0.0);
    m2[f].assign(cells, 0.0);
    max[f].assign(cells, -std::numeric_limits<double>::infinity());
    hist[f].assign(cells * field_specs()[f].bin_count(), 0);
  }
  stability_count.assign(cells * static_cast<std::size_t>(levels_) * kStabilityClassCount, 0);
}

void Accumulator::add(const TimeStepFields& step) {
  const int g = group_index(group_by_, step.valid_time_s);
  const long np = static_cast<long>(points_);
  if (levels_ > 0 && !step.stability_class)
    throw Error("climatology: a time step without stability classes was added to an accumulator with levels");
#ifdef LATENTLIFT_HAVE_OPENMP
#pragma omp parallel for schedule(static)
#endif
  for (long p = 0; p < np; ++p) {
    const std::size_t i = at(g, static_cast<std::size_t>(p));
    const std::int8_t cls = step.latent_class ? step.latent_class[p] : std::int8_t(-1);
    if (cls >= 0) {
      ++count[i];
      if (cls >= 1) ++latent_count[i];
      if (cls == 2) ++real_latent_count[i];
    }
    for (int f = 0; f < kFieldCount; ++f) {
      if (!step.field[f]) continue;
      const double v = step.field[f][p];
      if (std::isnan(v)) continue;
      const std::uint32_t nn = ++n[f][i];
      const double delta = v - mean[f][i];
      mean[f][i] += delta / nn;
      m2[f][i] += delta * (v - mean[f][i]);
      if (v > max[f][i]) max[f][i] = v;
      ++hist[f][hist_at(f, g, field_bin(f, v), static_cast<std::size_t>(p))];
    }
    for (int level = 0; level < levels_; ++level) {
      const std::int8_t s = step.stability_class[static_cast<std::size_t>(level) * points_ + p];
      if (s >= 0 && s < kStabilityClassCount) ++stability_count[stability_at(g, level, s, p)];
    }
  }
}

void Accumulator::merge(const Accumulator& other) {
  if (other.group_by_ != group_by_ || other.points_ != points_ || other.levels_ != levels_)
    throw Error("climatology: cannot merge accumulators of different shape (grouping, grid points or levels)");
  merge_counts(other.count.data(), other.latent_count.data(), other.real_latent_count.data());
  for (int f = 0; f < kFieldCount; ++f)
    merge_field(f, other.n[f].data(), other.mean[f].data(), other.m2[f].data(), other.max[f].data(),
                other.hist[f].data());
  merge_stability(other.stability_count.data());
}

void Accumulator::merge_counts(const std::uint32_t* count_b, const std::uint32_t* latent_b,
                               const std::uint32_t* real_latent_b) {
  for (std::size_t i = 0; i < count.size(); ++i) {
    count[i] += count_b[i];
    latent_count[i] += latent_b[i];
    real_latent_count[i] += real_latent_b[i];
  }
}

void Accumulator::merge_field(int f, const std::uint32_t* n_b, const double* mean_b, const double* m2_b,
                              const double* max_b, const std::uint32_t* hist_b) {
  const long cells = static_cast<long>(count.size());
#ifdef LATENTLIFT_HAVE_OPENMP
#pragma omp parallel for schedule(static)
#endif
  for (long c = 0; c < cells; ++c) {
    const std::size_t i = static_cast<std::size_t>(c);
    const std::uint32_t nb = n_b[i];
    if (nb == 0) continue;
    const std::uint32_t na = n[f][i];
    if (na == 0) {
      mean[f][i] = mean_b[i];
      m2[f][i] = m2_b[i];
    } else {
      // Chan, Golub & LeVeque (1979): pairwise combination of two partial results
      const double nt = static_cast<double>(na) + nb;
      const double delta = mean_b[i] - mean[f][i];
      mean[f][i] += delta * (nb / nt);
      m2[f][i] += m2_b[i] + delta * delta * (static_cast<double>(na) * nb / nt);
    }
    n[f][i] = na + nb;
    max[f][i] = std::max(max[f][i], max_b[i]);
  }
  std::vector<std::uint32_t>& h = hist[f];
  for (std::size_t k = 0; k < h.size(); ++k) h[k] += hist_b[k];
}

void Accumulator::merge_stability(const std::uint32_t* stability_b) {
  for (std::size_t k = 0; k < stability_count.size(); ++k) stability_count[k] += stability_b[k];
}

std::vector<double> Accumulator::percentile(int f, double q) const {
  const auto& edges = field_specs()[f].edges;
  const std::size_t bins = field_specs()[f].bin_count();
  std::vector<double> result(count.size());
  const long cells = static_cast<long>(count.size());
#ifdef LATENTLIFT_HAVE_OPENMP
#pragma omp parallel for schedule(static)
#endif
  for (long c = 0; c < cells; ++c) {
    const std::size_t i = static_cast<std::size_t>(c);
    result[i] = n[f][i] == 0 ? std::numeric_limits<double>::quiet_NaN()
                             : histogram_percentile(hist[f].data() + i * bins, edges, max[f][i], q);
  }
  return result;
}

namespace {
constexpr std::size_t kTile = 64;  // points per tile of the transposition
}

void Accumulator::histogram_to_file_layout(int f, int group, std::uint32_t* out) const {
  const std::size_t bins = field_specs()[f].bin_count();
  const std::uint32_t* in = hist[f].data() + at(group, 0) * bins;
  for (std::size_t p0 = 0; p0 < points_; p0 += kTile) {
    const std::size_t p1 = std::min(points_, p0 + kTile);
    for (std::size_t b = 0; b < bins; ++b)
      for (std::size_t p = p0; p < p1; ++p) out[b * points_ + p] = in[p * bins + b];
  }
}

void Accumulator::histogram_from_file_layout(int f, int group, const std::uint32_t* in) {
  const std::size_t bins = field_specs()[f].bin_count();
  std::uint32_t* out = hist[f].data() + at(group, 0) * bins;
  for (std::size_t p0 = 0; p0 < points_; p0 += kTile) {
    const std::size_t p1 = std::min(points_, p0 + kTile);
    for (std::size_t b = 0; b < bins; ++b)
      for (std::size_t p = p0; p < p1; ++p) out[p * bins + b] = in[b * points_ + p];
  }
}

namespace {

template <class T>
void put(std::vector<char>& out, const std::vector<T>& v) {
  const char* p = reinterpret_cast<const char*>(v.data());
  out.insert(out.end(), p, p + v.size() * sizeof(T));
}

template <class T>
void get(const std::vector<char>& in, std::size_t& pos, std::vector<T>& v) {
  const std::size_t bytes = v.size() * sizeof(T);
  if (pos + bytes > in.size()) throw Error("climatology: truncated accumulator image");
  if (bytes > 0) std::memcpy(v.data(), in.data() + pos, bytes);  // an empty vector's data() may be null
  pos += bytes;
}

}  // namespace

std::vector<char> Accumulator::serialize() const {
  std::vector<char> out;
  std::vector<std::int64_t> header{0x4c4c4331 /* "LLC1" */, static_cast<std::int64_t>(group_by_),
                                   static_cast<std::int64_t>(points_), levels_};
  put(out, header);
  for_each_array([&out](const auto& v) { put(out, v); });
  return out;
}

Accumulator Accumulator::deserialize(const std::vector<char>& bytes) {
  std::vector<std::int64_t> header(4);
  std::size_t pos = 0;
  get(bytes, pos, header);
  if (header[0] != 0x4c4c4331 || header[1] < 0 || header[1] > 3 || header[2] < 0 || header[3] < 0)
    throw Error("climatology: malformed accumulator image");
  Accumulator acc(static_cast<GroupBy>(header[1]), static_cast<std::size_t>(header[2]),
                  static_cast<int>(header[3]));
  acc.for_each_array([&bytes, &pos](auto& v) { get(bytes, pos, v); });
  if (pos != bytes.size()) throw Error("climatology: accumulator image has trailing bytes");
  return acc;
}

}  // namespace latentlift::climatology
