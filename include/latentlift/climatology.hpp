// Instability climatology: mergeable per-grid-point accumulators over many time
// steps (pure C++, no I/O), CF time decoding and the grouping of valid times,
// and the climatology run itself (run_climatology; NetCDF behind the .cpp).
// Variable names: DESIGN "Climatology output".
#pragma once

#include <array>
#include <cstddef>
#include <cstdint>
#include <string>
#include <vector>

#include "latentlift/errors.hpp"

namespace latentlift::climatology {

// ---- grouping of valid times ------------------------------------------------

/// How time steps are grouped: one group, 12 calendar months, 4 seasons (DJF MAM JJA SON), 24 UTC hours.
enum class GroupBy { all, month, season, hour };
/// "all" | "month" | "season" | "hour"; throws UsageError otherwise.
GroupBy parse_group_by(const std::string& text);
const char* to_string(GroupBy group_by);
/// Number of groups: 1, 12, 4 or 24.
int group_count(GroupBy group_by);
/// Labels written to the file: "all"; "Jan".."Dec"; "DJF".."SON"; "00UTC".."23UTC".
std::vector<std::string> group_labels(GroupBy group_by);
/// Group of a valid time given in seconds since 1970-01-01T00:00:00Z (proleptic Gregorian, UTC).
int group_index(GroupBy group_by, std::int64_t valid_time_s);

// ---- CF time ("<unit> since <date>", standard/gregorian calendar) ------------

/// Decoded CF time units: value * seconds_per_unit + epoch_s = seconds since 1970-01-01Z.
struct TimeUnits {
  double seconds_per_unit = 1.0;
  std::int64_t epoch_s = 0;
};
/// Parse "<seconds|minutes|hours|days> since YYYY-MM-DD[ T]hh:mm:ss[Z|+hh:mm]" (CF 1.8 sec. 4.4);
/// calendar: standard, gregorian (dates from 1582-10-15 on) or proleptic_gregorian; throws std::invalid_argument.
TimeUnits parse_time_units(const std::string& units, const std::string& calendar = "standard");
/// Days since 1970-01-01 of a proleptic Gregorian date (H. Hinnant's days_from_civil algorithm).
std::int64_t days_from_civil(int year, int month, int day);
/// Inverse of days_from_civil.
void civil_from_days(std::int64_t days, int& year, int& month, int& day);
/// ISO 8601 text "YYYY-MM-DDThh:mm:ssZ" of seconds since 1970-01-01Z.
std::string iso8601(std::int64_t time_s);

// ---- statistics fields and their histogram bins -----------------------------

constexpr int kFieldCount = 5;
/// One statistics field: DESIGN name, units in the file, and histogram bin edges e_0 < ... < e_K.
/// Bins: [0] the point mass v <= e_0; [k] (e_{k-1}, e_k] for k = 1..K; [K+1] overflow v > e_K.
struct FieldSpec {
  const char* name;
  const char* units;
  const char* long_name;
  std::vector<double> edges;
  int bin_count() const { return static_cast<int>(edges.size()) + 1; }
};
/// latent_layer_depth (hPa), mu_cape, mu_cin (J kg-1), mu_lift_to_lfc, easiest_lift (hPa).
const std::array<FieldSpec, kFieldCount>& field_specs();
/// Bin of value v under the rule of FieldSpec (v must not be NaN).
int bin_of(const std::vector<double>& edges, double v);
/// bin_of(field_specs()[f].edges, v), by a table look-up instead of a binary search.
int field_bin(int f, double v);
/// Percentile q (0-100] from a histogram: the smallest bin whose cumulative count reaches
/// r = q/100 * n is interpolated linearly (uniform within the bin, grouped-data rule);
/// the point-mass bin gives e_0, the overflow bin spans (e_K, max]; the result is capped at max.
/// NaN when the histogram is empty.
double histogram_percentile(const std::uint32_t* counts, const std::vector<double>& edges,
                            double max_value, double q);

/// Number of static stability classes (DESIGN: absolutely_stable .. neutral_dry).
constexpr int kStabilityClassCount = 5;

/// One time step of analysis fields on n_points grid points.
struct TimeStepFields {
  std::int64_t valid_time_s = 0;
  std::array<const double*, kFieldCount> field{};  // units of field_specs(); NaN = undefined
  const std::int8_t* latent_class = nullptr;       // 0 none, 1 pseudo, 2 real; < 0 = column not analysed
  const std::int8_t* stability_class = nullptr;    // [level * n_points + point]; < 0 missing; null if absent
};

/// Per grid point and group: valid counts, latent / real-latent counts, and per field the
/// defined count, mean and M2 (Welford 1962 updates, Chan, Golub & LeVeque 1979 pairwise merge),
/// maximum and a fixed-bin histogram; stability class counts per level when n_levels > 0.
class Accumulator {
 public:
  Accumulator(GroupBy group_by, std::size_t n_points, int n_levels);
  Accumulator() : Accumulator(GroupBy::all, 0, 0) {}

  /// Add one time step (OpenMP threads over points); its group comes from valid_time_s.
  void add(const TimeStepFields& step);
  /// Merge another accumulator of the same shape: counts and histograms exact, means within rounding.
  void merge(const Accumulator& other);
  /// The parts of merge, for streaming an accumulator array by array (MPI reduction).
  void merge_counts(const std::uint32_t* count_b, const std::uint32_t* latent_b, const std::uint32_t* real_latent_b);
  void merge_field(int f, const std::uint32_t* n_b, const double* mean_b, const double* m2_b, const double* max_b,
                   const std::uint32_t* hist_b);
  void merge_stability(const std::uint32_t* stability_b);

  GroupBy group_by() const { return group_by_; }
  int groups() const { return groups_; }
  std::size_t points() const { return points_; }
  int levels() const { return levels_; }
  /// Index of (group, point) in the per-point arrays.
  std::size_t at(int group, std::size_t point) const { return group * points_ + point; }
  /// Index into hist[f] of (group, point, bin): the bins of one point are contiguous.
  std::size_t hist_at(int f, int group, int bin, std::size_t point) const {
    return at(group, point) * field_specs()[f].bin_count() + bin;
  }
  /// Percentile q of field f at every (group, point), indexed by at(), by histogram_percentile;
  /// NaN where n = 0.
  std::vector<double> percentile(int f, double q) const;
  /// Index into stability_count of (group, level, class, point).
  std::size_t stability_at(int group, int level, int cls, std::size_t point) const {
    return ((static_cast<std::size_t>(group) * levels_ + level) * kStabilityClassCount + cls) * points_ + point;
  }

  /// Copy hist[f] of one group to/from the file layout [bin * points + point] (blocked transposition).
  void histogram_to_file_layout(int f, int group, std::uint32_t* out) const;
  void histogram_from_file_layout(int f, int group, const std::uint32_t* in);

  /// Flat byte image of the whole state and back; throws Error on a malformed image.
  std::vector<char> serialize() const;
  static Accumulator deserialize(const std::vector<char>& bytes);
  /// Calls visit(array) on every state array, in the one order of the byte image and of the MPI stream.
  template <class Visit>
  void for_each_array(Visit&& visit) const { visit_arrays(*this, visit); }
  template <class Visit>
  void for_each_array(Visit&& visit) { visit_arrays(*this, visit); }

  // State, indexed by at(group, point) unless noted.
  std::vector<std::uint32_t> count;          // time steps with the column analysed
  std::vector<std::uint32_t> latent_count;   // MU parcel latently unstable (class 1 or 2)
  std::vector<std::uint32_t> real_latent_count;  // class 2
  std::array<std::vector<std::uint32_t>, kFieldCount> n;  // time steps with the field defined
  std::array<std::vector<double>, kFieldCount> mean, m2, max;  // max = -inf when n = 0
  std::array<std::vector<std::uint32_t>, kFieldCount> hist;    // [hist_at(f, g, bin, p)]
  std::vector<std::uint32_t> stability_count;  // [stability_at(g, level, class, p)]

 private:
  template <class Self, class Visit>
  static void visit_arrays(Self& self, Visit& visit) {
    visit(self.count);
    visit(self.latent_count);
    visit(self.real_latent_count);
    for (int f = 0; f < kFieldCount; ++f) {
      visit(self.n[f]);
      visit(self.mean[f]);
      visit(self.m2[f]);
      visit(self.max[f]);
      visit(self.hist[f]);
    }
    visit(self.stability_count);
  }

  GroupBy group_by_;
  int groups_;
  std::size_t points_;
  int levels_;
};

/// Sample standard deviation sqrt(M2 / (n - 1)); NaN when n < 2.
double standard_deviation(std::uint32_t n, double m2);

// ---- the climatology run ------------------------------------------------------

/// What `latentlift climatology` was asked to do.
struct ClimatologyOptions {
  std::vector<std::string> inputs;
  std::string output;
  GroupBy group_by = GroupBy::all;
  bool group_given = false;   // --group given (with --update it must match the file)
  bool update = false;        // add to the existing output
  int threads = 0;            // OpenMP threads per rank (0: default)
  bool quiet = false;
  std::string command_line;   // recorded in the history attribute
  std::string config_path;    // --config, for model inputs (the analysis is run)
  std::vector<std::string> overrides;  // --set section.key=value, for model inputs
  bool level_fields = false;  // --level-fields: model inputs also give stability class counts
};

/// Summary of a run (on rank 0: totals over all ranks).
struct ClimatologySummary {
  long time_steps_added = 0;
  long time_steps_total = 0;
  int ranks = 1;
  double seconds = 0.0;
};

/// Run the climatology over the inputs (ranks of comm::world() share the time steps; rank 0
/// writes output via a temporary file and rename). Throws InputError / UsageError / Error;
/// when any rank failed, that rank throws its error, the others comm::RankFailed, and no
/// output is written.
ClimatologySummary run_climatology(const ClimatologyOptions& options);

}  // namespace latentlift::climatology
