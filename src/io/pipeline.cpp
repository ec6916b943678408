// The gridded analysis loop. Knows no physics: it hands columns to ColumnAnalyzer and
// moves the results into output arrays. One background thread does all netCDF work
// (prefetching the next block, writing finished ones) while OpenMP threads analyse.
#include "latentlift/pipeline.hpp"

#include <algorithm>
#include <chrono>
#include <cmath>
#include <condition_variable>
#include <deque>
#include <exception>
#include <future>
#include <limits>
#include <memory>
#include <thread>

#include "io/first_failure.hpp"
#include "io/plausibility.hpp"
#include "latentlift/errors.hpp"
#include "latentlift/parallel.hpp"

namespace latentlift {
namespace {

constexpr double kHpaPerPa = 0.01;

/// A single worker thread running tasks in order (all netCDF I/O of a run).
class IoWorker {
 public:
  IoWorker() : thread_([this] { loop(); }) {}
  ~IoWorker() {
    {
      std::lock_guard<std::mutex> lock(mutex_);
      stop_ = true;
    }
    wake_.notify_one();
    thread_.join();
  }
  std::future<void> submit(std::function<void()> task) {
    std::packaged_task<void()> packaged(std::move(task));
    std::future<void> result = packaged.get_future();
    {
      std::lock_guard<std::mutex> lock(mutex_);
      queue_.push_back(std::move(packaged));
    }
    wake_.notify_one();
    return result;
  }

 private:
  void loop() {
    for (;;) {
      std::packaged_task<void()> task;
      {
        std::unique_lock<std::mutex> lock(mutex_);
        wake_.wait(lock, [this] { return stop_ || !queue_.empty(); });
        if (queue_.empty()) return;
        task = std::move(queue_.front());
        queue_.pop_front();
      }
      task();
    }
  }
  std::mutex mutex_;
  std::condition_variable wake_;
  std::deque<std::packaged_task<void()>> queue_;
  bool stop_ = false;
  std::thread thread_;
};

double seconds_since(std::chrono::steady_clock::time_point start) {
  return std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count();
}

/// Wait for f, adding the time waited to seconds.
void timed_wait(std::future<void>& f, double& seconds) {
  if (!f.valid()) return;
  const auto start = std::chrono::steady_clock::now();
  f.get();
  seconds += seconds_since(start);
}

using io::detail::FirstFailure;

constexpr std::size_t kScalarFields = kScalarFieldCount;

/// Refuse a grid whose output maps alone would not fit in memory (a damaged or absurd dimension).
void check_grid_memory(const InputDataset& input, const PipelineOptions& options) {
  const GridDescription& grid = input.grid();
  const double columns = static_cast<double>(grid.n_columns);
  const double levels = static_cast<double>(grid.vertical.length);
  const double block = std::min(columns, static_cast<double>(options.config.block_columns));
  // Two field sets (double-buffered maps: 16 float fields and 1 byte field per column) and two
  // blocks of input (3 double arrays per level) with their results.
  const double bytes = 2.0 * columns * (kScalarFields * 4.0 + 1.0) + 2.0 * block * levels * 3.0 * 8.0 +
                       (options.level_fields ? 2.0 * block * levels * 19.0 + columns * levels : 0.0);
  io::detail::check_memory(input.paths().front(), "", "analysing " + std::to_string(grid.n_columns) + " columns of " +
                                                          std::to_string(grid.vertical.length) + " levels", bytes);
}

/// A run that analysed no column at all is an input error, with the count of each reason.
void require_analysed_columns(const InputDataset& input, const RunSummary& summary) {
  const QcCounts& qc = summary.qc;
  if (qc.columns_analysed > 0 || summary.columns == 0) return;
  std::string files;
  for (const std::string& path : input.paths()) files += (files.empty() ? "" : ", ") + path;
  std::string reasons = std::to_string(qc.columns_skipped - qc.surface_pressure_rejected) +
                        " with fewer than 3 usable levels";
  if (qc.surface_pressure_rejected > 0)
    reasons += ", " + std::to_string(qc.surface_pressure_rejected) + " with a surface pressure missing or outside 300-1100 hPa";
  reasons += "; levels: " + std::to_string(qc.temperature_rejected) + " temperatures outside 150-350 K, " +
             std::to_string(qc.humidity_clipped) + " humidities clipped";
  throw InputError(files, "", "at least one column that can be analysed; none of " + std::to_string(summary.columns) +
                                  " columns was (" + reasons + ")");
}

void prepare(FieldSet& fields, std::size_t n_columns) {
  fields.n_columns = n_columns;
  fields.qc = QcCounts{};
  for (const std::string& name : real_field_names()) fields.real[name].assign(n_columns, std::numeric_limits<float>::quiet_NaN());
  for (const std::string& name : byte_field_names()) fields.byte[name].assign(n_columns, kByteMissing);
}

/// The analysis of one run: analyzers per thread, double buffers, the I/O worker.
class Runner {
 public:
  Runner(const InputDataset& input, const PipelineOptions& options)
      : input_(input), options_(options), grid_(input.grid()) {
    int threads = options.threads > 0 ? options.threads : options.config.threads;
    if (threads > 0) parallel::set_threads(threads);
    settings_ = options.config.analysis;
    settings_.level_fields = options.level_fields;
    const int n = parallel::max_threads();
    for (int i = 0; i < n; ++i) analyzers_.push_back(std::make_unique<ColumnAnalyzer>(settings_));
    blocks_ = column_blocks(grid_, options.config.block_columns);
    input_.prepare_block_reads(options.config.block_columns);
    std::size_t largest = 0;
    for (const ColumnRange& b : blocks_) largest = std::max(largest, b.count);
    results_.resize(largest);
  }

  /// Analyse one input step into fields; level blocks go to level_sink (may be empty).
  /// block_sink(range), if given, runs on the I/O thread after each block (fields of range complete).
  /// next_step (kNoStep: none) is decoded ahead while this step is analysed.
  void run_step(std::size_t step, std::size_t step_number, std::size_t n_steps, FieldSet& fields,
                const std::function<void(const LevelFieldBlock&)>& level_sink,
                const std::function<void(ColumnRange)>& block_sink = {}, std::size_t next_step = kNoStep) {
    try {
      run_step_blocks(step, step_number, n_steps, fields, level_sink, block_sink, next_step);
      input_.release_step(step);
    } catch (...) {  // pending I/O tasks refer to this step's buffers: let them finish first
      input_.release_step(step);
      if (reading_.valid()) reading_.wait();
      for (auto& w : level_writes_)
        if (w.valid()) w.wait();
      for (auto& w : block_writes_)
        if (w.valid()) w.wait();
      block_writes_.clear();
      throw;
    }
  }

  static constexpr std::size_t kNoStep = static_cast<std::size_t>(-1);
  IoWorker& io() { return io_; }
  double input_wait_seconds = 0.0, output_wait_seconds = 0.0;

 private:
  void run_step_blocks(std::size_t step, std::size_t step_number, std::size_t n_steps, FieldSet& fields,
                       const std::function<void(const LevelFieldBlock&)>& level_sink,
                       const std::function<void(ColumnRange)>& block_sink, std::size_t next_step) {
    std::future<void>& reading = reading_;
    prepare(fields, grid_.n_columns);
    const int nz = static_cast<int>(grid_.vertical.length);
    bool any_t = false, any_h = false, any_z = false;
    {  // compressed inputs: every thread inflates this step's chunks (most are done if it was prefetched)
      const auto start = std::chrono::steady_clock::now();
      input_.decode_step_on_all_threads(step);
      input_wait_seconds += seconds_since(start);
    }
    if (next_step != kNoStep) {  // inflate the next step on the decoder thread while this one is analysed
      if (prefetch_.valid()) prefetch_.wait();
      prefetch_ = decoder_.submit([this, next_step] { input_.decode_step(next_step); });
    }
    reading = io_.submit([&, step] { input_.read_block(step, blocks_[0], column_blocks_[0]); });
    std::size_t done = 0;
    for (std::size_t b = 0; b < blocks_.size(); ++b) {
      timed_wait(reading, input_wait_seconds);
      ColumnBlock& block = column_blocks_[b % 2];
      if (b + 1 < blocks_.size()) {
        ColumnBlock& next = column_blocks_[(b + 1) % 2];
        const ColumnRange range = blocks_[b + 1];
        reading = io_.submit([&, step, range] { input_.read_block(step, range, next); });
      }
      any_t = any_t || block.any_temp;
      any_h = any_h || block.any_humidity;
      any_z = any_z || block.any_height;
      LevelFieldBlock& levels = level_blocks_[b % 2];
      if (options_.level_fields) {
        timed_wait(level_writes_[b % 2], output_wait_seconds);  // the buffer is free again
        prepare_levels(levels, block.range, nz);
      }
      analyze_block(block, fields, options_.level_fields ? &levels : nullptr);
      if (options_.level_fields && level_sink)
        level_writes_[b % 2] = io_.submit([&levels, &level_sink] { level_sink(levels); });
      if (block_sink) {
        const ColumnRange range = block.range;
        block_writes_.push_back(io_.submit([&block_sink, range] { block_sink(range); }));
      }
      done += block.range.count;
      if (options_.progress) options_.progress({step_number, n_steps, done, grid_.n_columns});
    }
    for (auto& w : level_writes_) timed_wait(w, output_wait_seconds);
    for (auto& w : block_writes_) timed_wait(w, output_wait_seconds);
    block_writes_.clear();
    if (!options_.part_of_dataset && (!any_t || !any_h || !any_z)) input_.throw_all_missing(step, any_t, any_h, any_z);
  }

  void prepare_levels(LevelFieldBlock& levels, ColumnRange range, int nz) {
    levels.range = range;
    levels.n_levels = nz;
    const std::size_t n = range.count * static_cast<std::size_t>(nz);
    for (const std::string& name : real_level_field_names()) levels.real[name].assign(n, std::numeric_limits<float>::quiet_NaN());
    for (const std::string& name : byte_level_field_names()) levels.byte[name].assign(n, kByteMissing);
  }

  void analyze_block(const ColumnBlock& block, FieldSet& fields, LevelFieldBlock* levels) {
    const int nz = block.n_levels;
    const long count = static_cast<long>(block.range.count);
    const std::size_t begin = block.range.begin;
    float* real[kScalarFields];
    for (std::size_t f = 0; f < kScalarFields; ++f) real[f] = fields.real[real_field_names()[f]].data();
    std::int8_t* latent_class = fields.byte["latent_class"].data();
    float* lev_real[4] = {nullptr, nullptr, nullptr, nullptr};
    std::int8_t* lev_byte[3] = {nullptr, nullptr, nullptr};
    if (levels) {
      for (int f = 0; f < 4; ++f) lev_real[f] = levels->real[real_level_field_names()[f]].data();
      for (int f = 0; f < 3; ++f) lev_byte[f] = levels->byte[byte_level_field_names()[f]].data();
    }
    const double* pressure = grid_.pressure_pa.data();
    const bool with_ps = !block.surface_pressure_pa.empty();
    // A surface pressure read from the input must be usable; one derived from the surface
    // height may be unknown (NaN) where the column's heights are.
    const bool ps_from_input = input_.surface_pressure_source() == SurfacePressureSource::input;
    auto analyze_one = [&](long i) {
      ColumnAnalyzer& analyzer = *analyzers_[parallel::thread_index()];
      ColumnInput in;
      in.n_levels = nz;
      in.pressure_pa = pressure;
      in.temp_k = &block.temp_k[i * nz];
      in.humidity = &block.humidity[i * nz];
      in.humidity_kind = block.humidity_kind;
      in.height_m = &block.height_m[i * nz];
      in.surface_pressure_pa = with_ps ? block.surface_pressure_pa[i] : -1.0;
      ColumnResult& r = results_[i];
      if (with_ps && ps_from_input && !io::detail::plausible_surface_pressure(in.surface_pressure_pa)) {
        r.qc = QcCounts{};  // a surface pressure given but unusable: skipped and counted, never "absent"
        r.set_missing(nz, levels != nullptr);
        r.qc.columns_skipped = 1;
        r.qc.surface_pressure_rejected = 1;
      } else {
        analyzer.analyze(in, r);
      }
      float v[kScalarFields];
      scalar_field_values(r, v);
      for (std::size_t f = 0; f < kScalarFields; ++f) real[f][begin + i] = v[f];
      latent_class[begin + i] = r.latent_class;
      if (levels && r.levels.wet_bulb_temperature_k.size() == static_cast<std::size_t>(nz)) {
        const LevelFields& lf = r.levels;
        for (int k = 0; k < nz; ++k) {
          const std::size_t at = static_cast<std::size_t>(k) * count + i;
          lev_real[0][at] = static_cast<float>(lf.wet_bulb_temperature_k[k]);
          lev_real[1][at] = static_cast<float>(lf.wet_bulb_potential_temperature_k[k]);
          lev_real[2][at] = static_cast<float>(lf.saturation_theta_w_k[k]);
          lev_real[3][at] = static_cast<float>(lf.max_parcel_excess_k[k]);
          lev_byte[0][at] = lf.latent_flag[k];
          lev_byte[1][at] = lf.stability_class[k];
          lev_byte[2][at] = lf.potential_instability[k];
        }
      }
    };
    FirstFailure failure;
#ifdef LATENTLIFT_HAVE_OPENMP
#pragma omp parallel for schedule(dynamic, 64)
#endif
    for (long i = 0; i < count; ++i) {
      try {
        analyze_one(i);
      } catch (...) {
        failure.capture();
      }
    }
    failure.rethrow();
    for (long i = 0; i < count; ++i) fields.qc.add(results_[i].qc);  // integer sums: order-independent
  }

  const InputDataset& input_;
  const PipelineOptions& options_;
  const GridDescription& grid_;
  AnalysisSettings settings_;
  std::vector<std::unique_ptr<ColumnAnalyzer>> analyzers_;
  std::vector<ColumnRange> blocks_;
  std::vector<ColumnResult> results_;
  ColumnBlock column_blocks_[2];
  LevelFieldBlock level_blocks_[2];
  std::future<void> level_writes_[2];
  std::future<void> reading_;
  std::vector<std::future<void>> block_writes_;
  std::future<void> prefetch_;
  IoWorker decoder_;  // decodes the next step ahead (InputDataset::decode_step)
  IoWorker io_;  // last: joined first, before the buffers its tasks use go away
};

}  // namespace

void scalar_field_values(const ColumnResult& r, float* v) {
  v[0] = static_cast<float>(r.latent_layer_depth_pa * kHpaPerPa);
  v[1] = static_cast<float>(r.latent_layer_depth_z_m);
  v[2] = static_cast<float>(r.latent_layer_bottom_pa * kHpaPerPa);
  v[3] = static_cast<float>(r.latent_layer_top_pa * kHpaPerPa);
  v[4] = static_cast<float>(r.tangent_theta_w_k);
  v[5] = static_cast<float>(r.tangent_pressure_pa * kHpaPerPa);
  v[6] = static_cast<float>(r.mu_pressure_pa * kHpaPerPa);
  v[7] = static_cast<float>(r.mu_theta_w_k);
  v[8] = static_cast<float>(r.mu_cape_j_kg);
  v[9] = static_cast<float>(r.mu_cin_j_kg);
  v[10] = static_cast<float>(r.mu_lfc_pressure_pa * kHpaPerPa);
  v[11] = static_cast<float>(r.mu_el_pressure_pa * kHpaPerPa);
  v[12] = static_cast<float>(r.mu_lift_to_lfc_pa * kHpaPerPa);
  v[13] = static_cast<float>(r.mu_lift_to_lfc_z_m);
  v[14] = static_cast<float>(r.easiest_lift_pa * kHpaPerPa);
  v[15] = static_cast<float>(r.easiest_lift_pressure_pa * kHpaPerPa);
}

std::vector<std::size_t> steps_of_times(const GridDescription& grid, const std::vector<std::size_t>& time_indices) {
  std::vector<std::size_t> steps;
  for (std::size_t step = 0; step < grid.n_steps; ++step) {
    if (time_indices.empty()) {
      steps.push_back(step);
      continue;
    }
    std::size_t t = time_index_of_step(grid, step);
    if (std::find(time_indices.begin(), time_indices.end(), t) != time_indices.end()) steps.push_back(step);
  }
  return steps;
}

RunSummary analyze_to_file(const InputDataset& input, const std::string& output, const PipelineOptions& options,
                           OutputOptions output_options) {
  const auto start = std::chrono::steady_clock::now();
  output_options.level_fields = options.level_fields;
  output_options.time_indices = options.time_indices;
  output_options.block_columns = options.config.block_columns;
  output_options.deflate_level = options.config.deflate_level;
  if (output_options.settings.empty()) output_options.settings = config_to_toml(options.config);
  check_grid_memory(input, options);
  OutputWriter writer(output, input, output_options);
  RunSummary summary;
  {
    Runner runner(input, options);
    // Maps written whole are double-buffered (one is written while the next step is analysed);
    // maps written band by band are complete on disk when run_step returns, so one buffer serves
    // every step and the peak memory does not depend on the number of steps.
    FieldSet fields[2];
    std::future<void> writes[2];
    const std::size_t n = writer.n_steps();
    const std::size_t buffers = writer.writes_by_block() ? 1 : 2;
    if (n > 0) input.release_steps_except(writer.input_step(0));  // the input's sample, if not used first
    try {
      for (std::size_t s = 0; s < n; ++s) {
        FieldSet& current = fields[s % buffers];
        timed_wait(writes[s % 2], summary.output_wait_seconds);
        auto level_sink = [&writer, s](const LevelFieldBlock& block) { writer.write_level_block(s, block); };
        const std::size_t next = s + 1 < n ? writer.input_step(s + 1) : Runner::kNoStep;
        if (writer.writes_by_block()) {  // maps written band by band while the analysis goes on
          auto block_sink = [&writer, &current, s](ColumnRange range) { writer.write_fields_block(s, range, current); };
          runner.run_step(writer.input_step(s), s, n, current, level_sink, block_sink, next);
        } else {  // one chunk per map: written whole, while the next step is analysed
          runner.run_step(writer.input_step(s), s, n, current, level_sink, {}, next);
          writes[s % 2] = runner.io().submit([&writer, &current, s] { writer.write_fields(s, current); });
        }
        summary.qc.add(current.qc);
      }
      for (auto& w : writes) timed_wait(w, summary.output_wait_seconds);
    } catch (...) {
      for (auto& w : writes)  // let pending writes finish before their buffers go away
        if (w.valid()) w.wait();
      throw;
    }
    summary.steps = n;
    summary.columns = n * input.grid().n_columns;
    summary.input_wait_seconds = runner.input_wait_seconds;
    summary.output_wait_seconds += runner.output_wait_seconds;
  }
  require_analysed_columns(input, summary);
  const auto commit_start = std::chrono::steady_clock::now();
  writer.commit(summary.qc);
  summary.output_wait_seconds += seconds_since(commit_start);
  summary.seconds = seconds_since(start);
  return summary;
}

RunSummary analyze_in_memory(
    const InputDataset& input, const PipelineOptions& options,
    const std::function<void(std::size_t input_step, const FieldSet& fields)>& consumer,
    const std::function<void(std::size_t input_step, const LevelFieldBlock& block)>& level_consumer) {
  const auto start = std::chrono::steady_clock::now();
  const GridDescription& grid = input.grid();
  for (std::size_t t : options.time_indices)
    if (t >= grid.n_times)
      throw UsageError("time index " + std::to_string(t) + " outside the input (" + std::to_string(grid.n_times) +
                       " time steps)");
  check_grid_memory(input, options);
  Runner runner(input, options);
  RunSummary summary;
  FieldSet fields;
  const std::size_t nz = grid.vertical.length;
  // With level fields the consumer gets the stability classes per level (the climatology
  // counts them); the other per-level fields are not kept.
  std::function<void(const LevelFieldBlock&)> level_sink;
  std::size_t current_step = 0;
  if (options.level_fields)
    level_sink = [&fields, &level_consumer, &current_step, nz, n = grid.n_columns](const LevelFieldBlock& block) {
      if (level_consumer) level_consumer(current_step, block);
      const std::vector<std::int8_t>& classes = block.byte.at("stability_class");
      const std::size_t count = block.range.count;
      for (std::size_t k = 0; k < nz; ++k)
        std::copy_n(classes.begin() + static_cast<std::ptrdiff_t>(k * count), count,
                    fields.stability_class_levels.begin() + static_cast<std::ptrdiff_t>(k * n + block.range.begin));
    };
  const std::vector<std::size_t> steps = steps_of_times(grid, options.time_indices);
  if (!steps.empty()) input.release_steps_except(steps[0]);  // the input's sample, if not used first
  for (std::size_t i = 0; i < steps.size(); ++i) {
    current_step = steps[i];
    if (options.level_fields) fields.stability_class_levels.assign(nz * grid.n_columns, kByteMissing);
    runner.run_step(steps[i], i, steps.size(), fields, level_sink, {},
                    i + 1 < steps.size() ? steps[i + 1] : Runner::kNoStep);
    summary.qc.add(fields.qc);
    consumer(steps[i], fields);
  }
  summary.steps = steps.size();
  summary.columns = steps.size() * grid.n_columns;
  summary.input_wait_seconds = runner.input_wait_seconds;
  summary.seconds = seconds_since(start);
  if (!options.part_of_dataset) require_analysed_columns(input, summary);
  return summary;
}

}  // namespace latentlift
