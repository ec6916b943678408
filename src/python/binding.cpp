// latentlift._core: the C++ library seen from Python (pybind11). The column kernel over
// NumPy arrays, and the command line's own reader, pipeline, writer and column report over
// NetCDF files (the xarray layer in latentlift/ hands datasets over as files, so that every
// rule of the command line applies unchanged). The GIL is released while C++ works.
#include <pybind11/numpy.h>
#include <pybind11/pybind11.h>
#include <pybind11/stl.h>

#include <cstdint>
#include <exception>
#include <limits>
#include <optional>
#include <memory>
#include <string>
#include <vector>

#include "latentlift/cli.hpp"
#include "latentlift/column.hpp"
#include "latentlift/config.hpp"
#include "latentlift/errors.hpp"
#include "latentlift/netcdf_io.hpp"
#include "latentlift/parallel.hpp"
#include "latentlift/pipeline.hpp"

namespace py = pybind11;
using namespace latentlift;

namespace {

using DoubleArray = py::array_t<double, py::array::c_style | py::array::forcecast>;

HumidityKind humidity_kind_of(const std::string& name) {
  if (name == "specific_humidity") return HumidityKind::specific_humidity;
  if (name == "relative_humidity") return HumidityKind::relative_humidity;
  if (name == "dew_point_temperature") return HumidityKind::dew_point;
  if (name == "humidity_mixing_ratio") return HumidityKind::mixing_ratio;
  throw UsageError("humidity_kind: expected specific_humidity, relative_humidity, dew_point_temperature or "
                   "humidity_mixing_ratio, got " + name);
}

std::vector<py::ssize_t> shape_of(const py::array& a) { return {a.shape(), a.shape() + a.ndim()}; }

py::dict qc_dict(const QcCounts& qc) {
  py::dict d;
  d["columns_analysed"] = qc.columns_analysed;
  d["columns_skipped"] = qc.columns_skipped;
  d["humidity_clipped"] = qc.humidity_clipped;
  d["dew_point_corrected"] = qc.dew_point_corrected;
  d["temperature_rejected"] = qc.temperature_rejected;
  return d;
}

/// The kernel over N columns: arrays [..., level], SI units, NaN missing.
py::dict analyze_columns(const DoubleArray& temp_k, const DoubleArray& humidity, const DoubleArray& pressure_pa,
                         const std::string& humidity_kind, const std::optional<DoubleArray>& height_m,
                         const std::optional<DoubleArray>& surface_pressure_pa, const std::string& config_path,
                         const std::vector<std::string>& overrides, bool level_fields, int threads) {
  const HumidityKind kind = humidity_kind_of(humidity_kind);
  const RunConfig config = load_config(config_path, overrides);
  if (temp_k.ndim() < 1) throw UsageError("temp_k: expected an array with levels as its last axis");
  const std::vector<py::ssize_t> shape = shape_of(temp_k);
  const std::vector<py::ssize_t> column_shape(shape.begin(), shape.end() - 1);
  const py::ssize_t nz = shape.back();
  py::ssize_t n = 1;
  for (py::ssize_t s : column_shape) n *= s;
  auto same_shape = [&](const py::array& a, const char* name) {
    if (shape_of(a) != shape)
      throw UsageError(std::string(name) + ": expected the shape of temp_k (columns..., levels)");
  };
  same_shape(humidity, "humidity");
  const bool pressure_per_column = pressure_pa.ndim() != 1;
  if (pressure_per_column)
    same_shape(pressure_pa, "pressure_pa");
  else if (pressure_pa.shape(0) != nz)
    throw UsageError("pressure_pa: expected one pressure per level (" + std::to_string(nz) +
                     ") or one per level and column (the shape of temp_k)");
  if (height_m) same_shape(*height_m, "height_m");
  if (surface_pressure_pa && shape_of(*surface_pressure_pa) != column_shape)
    throw UsageError("surface_pressure_pa: expected one value per column (the shape of temp_k without its last axis)");

  AnalysisSettings settings = config.analysis;
  settings.level_fields = level_fields;
  const int wanted_threads = threads > 0 ? threads : config.threads;

  // Outputs allocated while holding the GIL, filled without it.
  std::vector<py::array_t<float>> real;
  for (std::size_t f = 0; f < real_field_names().size(); ++f) real.emplace_back(column_shape);
  py::array_t<std::int8_t> latent_class(column_shape);
  std::vector<py::array_t<float>> level_real;
  std::vector<py::array_t<std::int8_t>> level_byte;
  if (level_fields) {
    for (std::size_t f = 0; f < real_level_field_names().size(); ++f) level_real.emplace_back(shape);
    for (std::size_t f = 0; f < byte_level_field_names().size(); ++f) level_byte.emplace_back(shape);
  }
  std::vector<float*> real_out;
  for (auto& a : real) real_out.push_back(a.mutable_data());
  std::vector<float*> level_real_out;
  for (auto& a : level_real) level_real_out.push_back(a.mutable_data());
  std::vector<std::int8_t*> level_byte_out;
  for (auto& a : level_byte) level_byte_out.push_back(a.mutable_data());
  std::int8_t* class_out = latent_class.mutable_data();
  const double* t = temp_k.data();
  const double* h = humidity.data();
  const double* p = pressure_pa.data();
  const double* z = height_m ? height_m->data() : nullptr;
  const double* ps = surface_pressure_pa ? surface_pressure_pa->data() : nullptr;
  std::vector<double> no_heights;
  if (!z) no_heights.assign(static_cast<std::size_t>(nz), std::numeric_limits<double>::quiet_NaN());
  QcCounts qc;
  {
    py::gil_scoped_release release;
    if (wanted_threads > 0) parallel::set_threads(wanted_threads);
    std::vector<std::unique_ptr<ColumnAnalyzer>> analyzers;
    for (int i = 0; i < parallel::max_threads(); ++i) analyzers.push_back(std::make_unique<ColumnAnalyzer>(settings));
    std::vector<QcCounts> qc_of_thread(analyzers.size());
    std::exception_ptr failure;  // an exception must not leave an OpenMP region: keep the first one
#ifdef LATENTLIFT_HAVE_OPENMP
#pragma omp parallel
#endif
    {
      ColumnResult r;
      const int me = parallel::thread_index();
#ifdef LATENTLIFT_HAVE_OPENMP
#pragma omp for schedule(dynamic, 64)
#endif
      for (py::ssize_t i = 0; i < n; ++i) {
        try {
          ColumnInput in;
          in.n_levels = static_cast<int>(nz);
          in.pressure_pa = pressure_per_column ? p + i * nz : p;
          in.temp_k = t + i * nz;
          in.humidity = h + i * nz;
          in.humidity_kind = kind;
          in.height_m = z ? z + i * nz : no_heights.data();
          in.surface_pressure_pa = ps ? ps[i] : -1.0;
          analyzers[me]->analyze(in, r);
          float v[kScalarFieldCount];
          scalar_field_values(r, v);
          for (std::size_t f = 0; f < kScalarFieldCount; ++f) real_out[f][i] = v[f];
          class_out[i] = r.latent_class;
          qc_of_thread[me].add(r.qc);
          if (level_fields) {
            const LevelFields& lf = r.levels;
            const bool have = lf.wet_bulb_temperature_k.size() == static_cast<std::size_t>(nz);
            for (py::ssize_t k = 0; k < nz; ++k) {
              const std::size_t at = static_cast<std::size_t>(i * nz + k);
              const double nan = std::numeric_limits<double>::quiet_NaN();
              level_real_out[0][at] = static_cast<float>(have ? lf.wet_bulb_temperature_k[k] : nan);
              level_real_out[1][at] = static_cast<float>(have ? lf.wet_bulb_potential_temperature_k[k] : nan);
              level_real_out[2][at] = static_cast<float>(have ? lf.saturation_theta_w_k[k] : nan);
              level_real_out[3][at] = static_cast<float>(have ? lf.max_parcel_excess_k[k] : nan);
              level_byte_out[0][at] = have ? lf.latent_flag[k] : kByteMissing;
              level_byte_out[1][at] = have ? lf.stability_class[k] : kByteMissing;
              level_byte_out[2][at] = have ? lf.potential_instability[k] : kByteMissing;
            }
          }
        } catch (...) {
#ifdef LATENTLIFT_HAVE_OPENMP
#pragma omp critical(latentlift_python_failure)
#endif
          if (!failure) failure = std::current_exception();
        }
      }
    }
    if (failure) std::rethrow_exception(failure);
    for (const QcCounts& c : qc_of_thread) qc.add(c);  // integer sums: order-independent
  }
  py::dict out;
  for (std::size_t f = 0; f < real.size(); ++f) out[py::str(real_field_names()[f])] = real[f];
  out["latent_class"] = latent_class;
  for (std::size_t f = 0; f < level_real.size(); ++f) out[py::str(real_level_field_names()[f])] = level_real[f];
  for (std::size_t f = 0; f < level_byte.size(); ++f) out[py::str(byte_level_field_names()[f])] = level_byte[f];
  out["qc"] = qc_dict(qc);
  return out;
}

/// `latentlift analyze` on files: the reader, pipeline and writer of the command line.
py::dict analyze_files(const std::vector<std::string>& inputs, const std::string& output,
                       const std::string& config_path, const std::vector<std::string>& overrides, bool level_fields,
                       int threads, const std::string& history, int deflate_level) {
  RunSummary summary;
  {
    py::gil_scoped_release release;
    PipelineOptions options;
    options.config = load_config(config_path, overrides);
    if (deflate_level >= 0) options.config.deflate_level = deflate_level;
    options.level_fields = level_fields;
    options.threads = threads;
    InputDataset input(inputs, options.config.aliases, options.config.conventions);
    OutputOptions output_options;
    output_options.overwrite = true;
    output_options.history = history;
    output_options.settings = config_to_toml(load_config(config_path, overrides));
    summary = analyze_to_file(input, output, options, output_options);
  }
  py::dict out;
  out["qc"] = qc_dict(summary.qc);
  out["steps"] = summary.steps;
  out["columns"] = summary.columns;
  out["seconds"] = summary.seconds;
  return out;
}

/// The output file of `analyze` with every variable, attribute and coordinate but no field
/// values written: what the command line would write, as a template for a lazy result.
void write_output_template(const std::vector<std::string>& inputs, const std::string& output,
                           const std::string& config_path, const std::vector<std::string>& overrides,
                           bool level_fields, const std::string& history) {
  py::gil_scoped_release release;
  const RunConfig config = load_config(config_path, overrides);
  InputDataset input(inputs, config.aliases, config.conventions);
  OutputOptions options;
  options.overwrite = true;
  options.level_fields = level_fields;
  options.deflate_level = 0;
  options.block_columns = config.block_columns;
  options.history = history;
  options.settings = config_to_toml(config);
  OutputWriter writer(output, input, options);
  writer.commit(QcCounts{});
}

std::string column_report(const std::vector<std::string>& inputs, double lat, double lon, std::size_t time,
                          const std::string& format, const std::string& config_path,
                          const std::vector<std::string>& overrides) {
  py::gil_scoped_release release;
  return cli::column_report(inputs, lat, lon, time, format, config_path, overrides);
}

}  // namespace

PYBIND11_MODULE(_core, m) {
  m.doc() = "latentlift's C++ library: the column kernel over NumPy arrays and the command line's file path";
  m.attr("__version__") = LATENTLIFT_VERSION;
  // Translators are tried newest first: the base class is registered first.
  static py::exception<Error> error(m, "Error", PyExc_RuntimeError);
  static py::exception<UsageError> usage_error(m, "UsageError", error.ptr());
  static py::exception<InputError> input_error(m, "InputError", error.ptr());
  py::register_exception_translator([](std::exception_ptr p) {
    try {
      if (p) std::rethrow_exception(p);
    } catch (const InputError& e) {
      PyErr_SetString(input_error.ptr(), e.what());
    } catch (const UsageError& e) {
      PyErr_SetString(usage_error.ptr(), e.what());
    } catch (const Error& e) {
      PyErr_SetString(error.ptr(), e.what());
    }
  });

  m.def("analyze_columns", &analyze_columns, py::arg("temp_k"), py::arg("humidity"), py::arg("pressure_pa"),
        py::arg("humidity_kind"), py::arg("height_m"), py::arg("surface_pressure_pa"), py::arg("config_path"),
        py::arg("overrides"), py::arg("level_fields"), py::arg("threads"),
        "Analyse N columns ([..., level] arrays, SI units, NaN missing); fields in output units (hPa, K, m, J kg-1)");
  m.def("analyze_files", &analyze_files, py::arg("inputs"), py::arg("output"), py::arg("config_path"),
        py::arg("overrides"), py::arg("level_fields"), py::arg("threads"), py::arg("history"),
        py::arg("deflate_level") = -1, "latentlift analyze INPUT... -o OUTPUT, in process");
  m.def("write_output_template", &write_output_template, py::arg("inputs"), py::arg("output"),
        py::arg("config_path"), py::arg("overrides"), py::arg("level_fields"), py::arg("history"),
        "The output file of analyze without field values (variables, attributes, coordinates, grid mapping)");
  m.def("column_report", &column_report, py::arg("inputs"), py::arg("lat"), py::arg("lon"), py::arg("time"),
        py::arg("format"), py::arg("config_path"), py::arg("overrides"), "latentlift column, as text");
}
