// The climatology run: scan inputs, refuse duplicate valid times, share the time steps
// among the ranks, accumulate (OpenMP over points), reduce to rank 0, merge with the
// existing file on --update, write. Any rank's failure stops every rank before the
// output is written.
#include <algorithm>
#include <chrono>
#include <cmath>
#include <cstdio>
#include <filesystem>
#include <map>
#include <memory>
#include <new>
#include <optional>

#include "latentlift/climatology.hpp"
#include "latentlift/comm.hpp"
#include "latentlift/config.hpp"
#include "io/plausibility.hpp"
#include "latentlift/errors.hpp"
#include "latentlift/parallel.hpp"
#include "latentlift/pipeline.hpp"
#include "io/temporary_output.hpp"
#include "stats/stats_netcdf.hpp"

namespace latentlift::climatology {

namespace {

using detail::Grid;
using detail::Settings;

// One input file: an analyze output (read), a pressure-level model input (analysed here), or
// another climatology file (merged whole on rank 0).
struct Source {
  std::string path;
  bool analysis_output = true;
  bool climatology = false;
  std::vector<std::string> input_files;  // of a climatology input
  std::vector<std::string> model_paths;  // of model input: opened together, like analyze
  std::string surface_pressure_source;   // of model input or analyze output ("" unknown)
  Grid grid;
  std::vector<std::int64_t> valid_times;
  Settings settings;
  detail::AnalysisInput analysis;  // when analysis_output
};

// One time step of one input.
struct Item {
  std::size_t source;
  std::size_t time_index;
  std::int64_t valid_time;
};

Grid grid_of(const GridDescription& g) {
  Grid grid;
  grid.points = g.n_columns;
  for (const auto& d : g.horizontal) {
    grid.dims.push_back(d.name);
    grid.sizes.push_back(d.length);
  }
  grid.grid_mapping = g.grid_mapping;
  grid.coordinates = g.coordinates;
  return grid;
}

Source scan_model_input(const std::vector<std::string>& paths, const RunConfig& config, bool level_fields) {
  Source s;
  for (const std::string& p : paths) s.path += (s.path.empty() ? "" : ", ") + p;
  const std::string& path = s.path;
  s.model_paths = paths;
  s.analysis_output = false;
  InputDataset input(paths, config.aliases, config.conventions);
  s.surface_pressure_source = to_string(input.surface_pressure_source());
  if (input.surface_pressure_source() == SurfacePressureSource::none && comm::world().rank() == 0)
    std::fprintf(stderr, "climatology: warning: %s has no surface pressure and no surface geopotential or orography: "
                         "levels below the ground are analysed as air (input.require_surface_pressure = true "
                         "refuses such input)\n", path.c_str());
  const GridDescription& g = input.grid();
  for (const auto& o : g.outer)
    if (!o.is_time && o.length > 1)
      throw InputError(path, o.name, "no outer dimension but time (one valid time per step for a climatology)");
  if (g.time_values.empty())
    throw InputError(path, "time", "a time coordinate (units '<unit> since <date>') giving the valid time of each step");
  TimeUnits units;
  try {
    units = parse_time_units(g.time_units, g.time_calendar);
  } catch (const std::invalid_argument& e) {
    throw InputError(path, "time", e.what());
  }
  for (double v : g.time_values)
    s.valid_times.push_back(static_cast<std::int64_t>(std::llround(v * units.seconds_per_unit)) + units.epoch_s);
  s.grid = grid_of(g);
  if (level_fields) {  // the analysis runs with level fields: stability classes per level
    s.grid.level_dim = g.vertical.name;
    s.grid.levels = g.vertical.length;
  }
  s.settings = detail::settings_from_toml(config_to_toml(config));
  return s;
}

std::string describe_grid(const Grid& g) {
  std::string out;
  for (std::size_t i = 0; i < g.dims.size(); ++i) out += (i ? ", " : "") + g.dims[i] + "=" + std::to_string(g.sizes[i]);
  return out;
}

void check_same_grid(const Grid& reference, const std::string& reference_file, const Source& s) {
  if (reference.dims != s.grid.dims || reference.sizes != s.grid.sizes)
    throw InputError(s.path, "", "the grid of " + reference_file + " (" + describe_grid(reference) + "), got " +
                                     describe_grid(s.grid));
}

std::string settings_text(const Settings& settings) {
  std::string out;
  for (const auto& [k, v] : settings) out += (out.empty() ? "" : ", ") + k + "=" + v;
  return out.empty() ? "(none recorded)" : out;
}

// Binomial-tree reduction of the accumulators to rank 0 (merge order fixed by the rank count),
// streamed array by array so that a rank holds at most one field of the other's state at a time.
template <class T>
void send_vector(comm::Communicator& c, int dest, const std::vector<T>& v) {
  c.send_raw(dest, v.data(), v.size() * sizeof(T));
}

template <class T>
const T* recv_vector(comm::Communicator& c, int source, std::vector<T>& buffer, std::size_t n) {
  buffer.resize(n);
  c.recv_raw(source, buffer.data(), n * sizeof(T));
  return buffer.data();
}

void reduce_to_root(comm::Communicator& c, Accumulator& acc) {
  for (int step = 1; step < c.size(); step *= 2) {
    if (c.rank() % (2 * step) == 0) {
      const int src = c.rank() + step;
      if (src >= c.size()) continue;
      const std::size_t cells = acc.count.size();
      std::vector<std::uint32_t> u1, u2, u3;
      std::vector<double> d1, d2, d3;
      const auto* cb = recv_vector(c, src, u1, cells);
      const auto* lb = recv_vector(c, src, u2, cells);
      const auto* rb = recv_vector(c, src, u3, cells);
      acc.merge_counts(cb, lb, rb);
      for (int f = 0; f < kFieldCount; ++f) {
        const auto* nb = recv_vector(c, src, u1, cells);
        const auto* mb = recv_vector(c, src, d1, cells);
        const auto* m2b = recv_vector(c, src, d2, cells);
        const auto* xb = recv_vector(c, src, d3, cells);
        const auto* hb = recv_vector(c, src, u2, acc.hist[f].size());
        acc.merge_field(f, nb, mb, m2b, xb, hb);
      }
      acc.merge_stability(recv_vector(c, src, u1, acc.stability_count.size()));
    } else {
      const int dest = c.rank() - step;
      acc.for_each_array([&c, dest](const auto& v) { send_vector(c, dest, v); });
      acc = Accumulator();  // sent: release the memory
      return;
    }
  }
}

// The whole state of the grid, or an Error saying how much memory it needs.
Accumulator make_accumulator(const detail::StatsMetadata& meta) {
  {  // a grid too large for the machine is a damaged or absurd input (exit 2), said before allocating
    double bins = 0;
    for (const auto& s : field_specs()) bins += s.bin_count();
    const double bytes_per_cell = 3 * 4 + kFieldCount * 28 + 4.0 * bins + 4.0 * kStabilityClassCount * meta.grid.levels;
    io::detail::check_memory(meta.input_files.empty() ? std::string("climatology") : meta.input_files.front(), "",
                             "the statistics of " + std::to_string(meta.grid.points) + " grid points x " +
                                 std::to_string(group_count(meta.group_by)) + " groups",
                             bytes_per_cell * static_cast<double>(meta.grid.points) * group_count(meta.group_by));
  }
  try {
    return Accumulator(meta.group_by, meta.grid.points, static_cast<int>(meta.grid.levels));
  } catch (const std::bad_alloc&) {
    const double bytes_per_cell = 3 * 4 + kFieldCount * 28 + 4.0 * [] {
      int bins = 0;
      for (const auto& s : field_specs()) bins += s.bin_count();
      return bins;
    }() + 4.0 * kStabilityClassCount * meta.grid.levels;
    char text[200];
    std::snprintf(text, sizeof text,
                  "climatology: not enough memory for the statistics of %zu grid points x %d groups "
                  "(about %.1f GB per process)",
                  meta.grid.points, group_count(meta.group_by),
                  bytes_per_cell * meta.grid.points * group_count(meta.group_by) / 1e9);
    throw Error(text);
  }
}

}  // namespace

ClimatologySummary run_climatology(const ClimatologyOptions& options) {
  namespace fs = std::filesystem;
  const auto started = std::chrono::steady_clock::now();
  comm::Communicator& c = comm::world();
  parallel::set_threads(options.threads);

  std::pair<int, std::string> failure{0, ""};
  std::vector<Source> sources;
  std::vector<Item> items;
  std::vector<std::int64_t> merged_times;  // valid times of climatology inputs
  std::optional<detail::StatsMetadata> existing;
  detail::StatsMetadata meta;
  RunConfig config;

  // ---- phase 1 (every rank): options, inputs, times, duplicates ------------------------
  failure = comm::capture([&] {
    if (options.inputs.empty()) throw UsageError("climatology: no input files");
    if (options.output.empty()) throw UsageError("climatology: -o STATS.nc is required");
    io::detail::TemporaryOutput::check_target(options.output, options.update, detail::kReplaceHint);
    std::error_code ec;
    const bool exists = fs::exists(options.output, ec);
    if (!exists && options.update)
      throw UsageError(options.output + ": --update needs an existing climatology file");
    meta.group_by = options.group_by;
    if (options.update) {
      existing = detail::read_stats_metadata(options.output);
      if (options.group_given && existing->group_by != options.group_by)
        throw UsageError(options.output + ": groups by " + to_string(existing->group_by) + ", not by " +
                         to_string(options.group_by) + " (--group must match the file or be left out)");
      meta.group_by = existing->group_by;
    }
    bool grouping_fixed = false;
    std::vector<std::string> model_paths;  // opened together as one input, as analyze does
    for (const std::string& path : options.inputs) {
      if (is_grib_input(path)) {
        model_paths.push_back(path);
      } else if (detail::is_stats_file(path)) {
        const detail::StatsMetadata m = detail::read_stats_metadata(path);
        if (options.group_given || existing) {
          if (m.group_by != meta.group_by)
            throw InputError(path, "", std::string("a climatology grouped by ") + to_string(meta.group_by) +
                                           ", got one grouped by " + to_string(m.group_by));
        } else if (!grouping_fixed) {
          meta.group_by = m.group_by;  // the first climatology input sets the grouping
        } else if (m.group_by != meta.group_by) {
          throw InputError(path, "", std::string("a climatology grouped by ") + to_string(meta.group_by) +
                                         " like the other climatology inputs, got " + to_string(m.group_by));
        }
        grouping_fixed = true;
        Source s;
        s.path = path;
        s.analysis_output = false;
        s.climatology = true;
        s.grid = m.grid;
        s.valid_times = m.valid_times;
        s.settings = m.settings;
        s.input_files = m.input_files;
        sources.push_back(std::move(s));
      } else if (detail::is_analysis_output(path)) {
        Source s;
        s.path = path;
        s.analysis = detail::scan_analysis_output(path);
        s.grid = s.analysis.grid;
        s.valid_times = s.analysis.valid_times;
        s.settings = s.analysis.settings;
        s.surface_pressure_source = s.analysis.surface_pressure_source;
        sources.push_back(std::move(s));
      } else {
        model_paths.push_back(path);
      }
    }
    if (!model_paths.empty()) {
      config = load_config(options.config_path, options.overrides);
      sources.push_back(scan_model_input(model_paths, config, options.level_fields));
    }
    // one grid, one set of analysis settings, level statistics only when every input has them
    const Grid& ref = existing ? existing->grid : sources.front().grid;
    const std::string ref_file = existing ? options.output : sources.front().path;
    const Settings& ref_settings = existing ? existing->settings : sources.front().settings;
    const bool levels = existing ? existing->grid.levels > 0 : sources.front().grid.levels > 0;
    for (const Source& s : sources) {
      check_same_grid(ref, ref_file, s);
      if (s.settings != ref_settings)
        throw InputError(s.path, "", "the analysis settings of " + ref_file + " (" + settings_text(ref_settings) +
                                         "), got " + settings_text(s.settings));
      if ((s.grid.levels > 0) != levels || (levels && s.grid.levels != ref.levels))
        throw InputError(s.path, "stability_class",
                         levels ? "per-level stability classes on " + std::to_string(ref.levels) + " levels, as in " +
                                      ref_file + " (analyze --level-fields)"
                                : "no per-level fields, as " + ref_file + " has none (or all inputs with them)");
    }
    meta.grid = ref;
    meta.settings = ref_settings;
    // every time step once: no duplicates among the inputs nor with the file
    std::map<std::int64_t, std::string> seen;
    if (existing)
      for (std::int64_t t : existing->valid_times) seen[t] = options.output + " (already counted)";
    for (std::size_t s = 0; s < sources.size(); ++s)
      for (std::size_t t = 0; t < sources[s].valid_times.size(); ++t) {
        const std::int64_t vt = sources[s].valid_times[t];
        const std::string where = sources[s].climatology ? " (counted there)" : " (time index " + std::to_string(t) + ")";
        auto [it, inserted] = seen.emplace(vt, sources[s].path + where);
        if (!inserted)
          throw InputError(sources[s].path, sources[s].climatology ? "valid_time" : "time",
                           "each valid time once; " + iso8601(vt) + where + " is also in " + it->second);
        if (!sources[s].climatology) items.push_back({s, t, vt});
        else merged_times.push_back(vt);
      }
    if (items.empty() && merged_times.empty())
      throw InputError(options.inputs.front(), "time", "at least one time step");
  });
  comm::agree(c, failure.first, failure.second);

  // ---- phase 2 (every rank, its share): accumulate ------------------------------------
  Accumulator acc;
  const comm::Range mine = comm::partition(items.size(), c.rank(), c.size());
  failure = comm::capture([&] {
    acc = make_accumulator(meta);
    std::size_t i = mine.begin;
    detail::StepBuffers buffers;
    while (i < mine.end) {
      const std::size_t s = items[i].source;
      std::size_t j = i;
      while (j < mine.end && items[j].source == s) ++j;  // this rank's run of steps of one input
      const Source& src = sources[s];
      if (src.analysis_output) {
        detail::AnalysisReader reader(src.analysis, meta.grid.levels > 0);
        for (std::size_t k = i; k < j; ++k) {
          reader.read(items[k].time_index, buffers);
          acc.add(buffers.view(items[k].valid_time));
        }
      } else {
        InputDataset input(src.model_paths, config.aliases, config.conventions);
        PipelineOptions po;
        po.config = config;
        po.threads = options.threads;
        po.level_fields = meta.grid.levels > 0;
        for (std::size_t k = i; k < j; ++k) po.time_indices.push_back(items[k].time_index);
        analyze_in_memory(input, po, [&](std::size_t step, const FieldSet& fields) {
          const std::size_t t = time_index_of_step(input.grid(), step);
          for (int f = 0; f < kFieldCount; ++f) {
            auto it = fields.real.find(field_specs()[f].name);
            if (it == fields.real.end()) throw Error(std::string("pipeline did not deliver ") + field_specs()[f].name);
            buffers.field[f].assign(it->second.begin(), it->second.end());
          }
          auto cls = fields.byte.find("latent_class");
          if (cls == fields.byte.end()) throw Error("pipeline did not deliver latent_class");
          buffers.latent_class = cls->second;
          buffers.stability = fields.stability_class_levels;  // empty without level fields
          acc.add(buffers.view(src.valid_times.at(t)));
        });
      }
      i = j;
    }
  });
  comm::agree(c, failure.first, failure.second);

  // ---- phase 3: reduce to rank 0, merge with the file, write --------------------------
  reduce_to_root(c, acc);
  ClimatologySummary summary;
  summary.ranks = c.size();
  summary.time_steps_added = static_cast<long>(items.size() + merged_times.size());
  if (c.rank() == 0) {
    if (existing) {
      Accumulator total = detail::read_stats_accumulator(options.output, *existing);
      total.merge(acc);
      acc = std::move(total);
      meta.valid_times = existing->valid_times;
      meta.input_files = existing->input_files;
      meta.history = existing->history;
    }
    for (const Source& src : sources)
      if (src.climatology) acc.merge(detail::read_stats_accumulator(src.path, detail::read_stats_metadata(src.path)));
    for (const Item& it : items) meta.valid_times.push_back(it.valid_time);
    meta.valid_times.insert(meta.valid_times.end(), merged_times.begin(), merged_times.end());
    std::sort(meta.valid_times.begin(), meta.valid_times.end());
    for (const Source& src : sources) {
      if (src.climatology) meta.input_files.insert(meta.input_files.end(), src.input_files.begin(), src.input_files.end());
      else if (!src.model_paths.empty()) meta.input_files.insert(meta.input_files.end(), src.model_paths.begin(), src.model_paths.end());
      else meta.input_files.push_back(src.path);
    }
    // The weakest surface pressure of the inputs: none, else derived, else input ("" when unrecorded).
    for (const char* level : {"input", "derived_from_surface_geopotential", "none"})
      for (const Source& src : sources)
        if (src.surface_pressure_source == level) meta.surface_pressure_source = level;
    if (existing && (existing->surface_pressure_source == "none" ||
                     (existing->surface_pressure_source == "derived_from_surface_geopotential" &&
                      meta.surface_pressure_source != "none")))
      meta.surface_pressure_source = existing->surface_pressure_source;
    if (!options.command_line.empty()) meta.history += (meta.history.empty() ? "" : "\n") + options.command_line;
    std::string template_path = existing ? options.output : sources.front().path;
    std::unique_ptr<InputDataset> model_template;  // model input: its grid file (GRIB: the staged NetCDF)
    if (!existing && !sources.front().model_paths.empty()) {
      model_template = std::make_unique<InputDataset>(sources.front().model_paths, config.aliases, config.conventions);
      template_path = model_template->grid_netcdf_path();
    }
    detail::write_stats(options.output, meta, acc, template_path, options.update);
    summary.time_steps_total = static_cast<long>(meta.valid_times.size());
  }
  summary.seconds = std::chrono::duration<double>(std::chrono::steady_clock::now() - started).count();
  return summary;
}

}  // namespace latentlift::climatology
