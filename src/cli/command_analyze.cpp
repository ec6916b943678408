// latentlift analyze INPUT.nc... -o OUT.nc [--config FILE] [--set KEY=VALUE]... [--threads N]
//                   [--level-fields] [--overwrite] [--quiet]
#include <unistd.h>

#include <algorithm>
#include <chrono>
#include <cstdio>
#include <future>
#include <string>
#include <vector>

#include "cli/commands.hpp"
#include "latentlift/comm.hpp"
#include "latentlift/errors.hpp"
#include "latentlift/parallel.hpp"
#include "latentlift/pipeline.hpp"
#include "latentlift/pseudoadiabat.hpp"

namespace latentlift::cli {

namespace {

struct AnalyzeArgs {
  std::vector<std::string> inputs;
  std::string output, config;
  std::vector<std::string> sets;
  int threads = 0;
  bool level_fields = false, overwrite = false, quiet = false;
};

std::string command_line(int argc, const std::vector<std::string>& words) {
  (void)argc;
  std::string text = "latentlift analyze";
  for (const std::string& w : words) text += " " + w;
  return text;
}

int run_analyze(const AnalyzeArgs& args) {
  PipelineOptions options;
  options.config = load_config(args.config, args.sets);
  options.level_fields = args.level_fields;
  options.threads = args.threads;
  if (args.threads == 0) options.config.threads = 0;  // --threads 0: all cores, whatever the config says
  const bool progress = !args.quiet && isatty(fileno(stderr));
  if (progress)
    options.progress = [last = std::chrono::steady_clock::time_point{}](const Progress& p) mutable {
      const auto now = std::chrono::steady_clock::now();  // at most ten updates a second
      if (p.columns_done < p.n_columns && now - last < std::chrono::milliseconds(100)) return;
      last = now;
      std::fprintf(stderr, "\ranalyze: step %zu/%zu, columns %zu/%zu (%3.0f%%)   ", p.step + 1, p.n_steps,
                   p.columns_done, p.n_columns, 100.0 * p.columns_done / std::max<std::size_t>(1, p.n_columns));
      std::fflush(stderr);
    };
  // The pseudo-adiabat tables are built (on the analysis threads) while input and output are opened.
  const int threads = options.threads > 0 ? options.threads : options.config.threads;
  std::future<void> tables = std::async(std::launch::async, [threads] {
    parallel::set_threads(threads);
    pseudoadiabat::Table::instance();
  });
  if (threads > 0) parallel::set_threads(threads);  // opening the input inflates its first step on them
  InputDataset input(args.inputs, options.config.aliases, options.config.conventions);
  warn_without_surface_pressure(input, "analyze");
  OutputOptions output_options;
  output_options.overwrite = args.overwrite;
  std::vector<std::string> words;
  for (const std::string& in : args.inputs) words.push_back(in);
  words.push_back("-o " + args.output);
  if (!args.config.empty()) words.push_back("--config " + args.config);
  for (const std::string& s : args.sets) words.push_back("--set " + s);
  if (args.threads > 0) words.push_back("--threads " + std::to_string(args.threads));
  if (args.level_fields) words.push_back("--level-fields");
  if (args.overwrite) words.push_back("--overwrite");
  output_options.history = command_line(0, words);
  // MPI scale-out (issue 5; helper in src/stats/comm.cpp): under mpirun with more than one
  // rank, the ranks share the input time steps and write one file per time step, named
  // after -o (OUT.nc -> OUT_t0003.nc, or a "{time}" placeholder in the name). When any rank
  // fails, every rank removes the files it wrote and the lowest failing rank reports.
  if (comm::world().size() > 1) {
    try {
      const std::size_t files = comm::distributed_over_times(
          comm::world(), input.grid().n_times, args.output, [&](std::size_t time_index, const std::string& out) {
            PipelineOptions one_step = options;
            one_step.time_indices = {time_index};
            one_step.progress = nullptr;
            analyze_to_file(input, out, one_step, output_options);
          });
      if (!args.quiet && comm::world().rank() == 0)
        std::printf("analyze: %d ranks wrote %zu files, one per time step (%s)\n", comm::world().size(), files,
                    comm::rank_output_name(args.output, 0).c_str());
    } catch (const comm::RankFailed& e) {
      return e.exit_code();  // the failing rank printed the reason
    }
    return 0;
  }
  RunSummary summary = analyze_to_file(input, args.output, options, output_options);
  if (progress) std::fputs("\n", stderr);
  if (!args.quiet) {
    const QcCounts& qc = summary.qc;
    std::printf("analyze: wrote %s\n", args.output.c_str());
    std::printf("  steps %zu, columns %zu: analysed %ld, skipped %ld (fewer than 3 usable levels, or no usable surface pressure)\n", summary.steps,
                summary.columns, qc.columns_analysed, qc.columns_skipped);
    print_input_summary(input);
    std::printf("  quality control: humidity clipped %ld, dew point corrected %ld, temperatures rejected %ld, "
                "surface pressures rejected %ld\n",
                qc.humidity_clipped, qc.dew_point_corrected, qc.temperature_rejected, qc.surface_pressure_rejected);
    std::printf("  time %.2f s on %d threads (waiting for input %.2f s, for output %.2f s), %.0f columns/s\n",
                summary.seconds, parallel::max_threads(), summary.input_wait_seconds, summary.output_wait_seconds,
                summary.seconds > 0 ? summary.columns / summary.seconds : 0.0);
  }
  return 0;
}

}  // namespace

void add_analyze_command(CLI::App& app, int& exit_code) {
  auto args = std::make_shared<AnalyzeArgs>();
  CLI::App* cmd = app.add_subcommand("analyze", "Analyse every column of NetCDF input and write CF NetCDF fields");
  cmd->add_option("inputs", args->inputs, "Input NetCDF files (time steps of one grid, or fields split across files)")
      ->required()
      ->check(CLI::ExistingFile);
  cmd->add_option("-o,--output", args->output, "Output NetCDF file")->required();
  cmd->add_option("--config", args->config, "Configuration file (TOML)")->check(CLI::ExistingFile);
  cmd->add_option("--set", args->sets, "Override a configuration key: section.key=value (repeatable)")
      ->allow_extra_args(false)
      ->take_all();
  cmd->add_option("--threads", args->threads, "Threads over columns (0 or not given: all cores)")
      ->check(CLI::NonNegativeNumber);
  cmd->add_flag("--level-fields", args->level_fields, "Also write the per-level fields");
  cmd->add_flag("--overwrite", args->overwrite, "Replace an existing output file");
  cmd->add_flag("--quiet", args->quiet, "No progress line and no run summary");
  cmd->callback([args, &exit_code] { exit_code = run_analyze(*args); });
}

}  // namespace latentlift::cli
