// latentlift._core: the C++ library seen from Python (pybind11). The column kernel over
// NumPy arrays, and the command line's own reader, pipeline, writer and column report over
// NetCDF files (the xarray layer in latentlift/ hands datasets over as files, so that every
// rule of the command line applies unchanged). The GIL is released while C++ works.
#include <pybind11/numpy.h>
#include <pybind11/pybind11.h>
#include <pybind11/stl.h>

#include <algorithm>
#include <cstdint>
#include <exception>
#include <functional>
#include <map>
#include <numeric>
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
  d["surface_pressure_rejected"] = qc.surface_pressure_rejected;
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

/// A dataset handed over from Python: the MemoryDataset and the arrays its values point into.
struct HeldDataset {
  MemoryDataset dataset;
  std::vector<DoubleArray> arrays;  // keep the values alive (and in double) while C++ reads them
};

StoredType stored_type_of(const std::string& dtype, const std::string& variable) {
  static const std::map<std::string, StoredType> types = {
      {"int8", StoredType::int8},       {"bool", StoredType::int8},       {"uint8", StoredType::uint8},
      {"int16", StoredType::int16},     {"uint16", StoredType::uint16},   {"int32", StoredType::int32},
      {"uint32", StoredType::uint32},   {"int64", StoredType::int64},     {"uint64", StoredType::uint64},
      {"float32", StoredType::float32}, {"float64", StoredType::float64}, {"text", StoredType::text}};
  auto it = types.find(dtype);
  if (it == types.end()) throw UsageError("variable '" + variable + "': values of type " + dtype + " cannot be read");
  return it->second;
}

geo::AttributeList attributes_of(const py::dict& attributes) {
  geo::AttributeList out;
  for (const auto& [key, value] : attributes) {
    const std::string name = py::str(key);
    if (py::isinstance<py::str>(value))
      out.push_back({name, value.cast<std::string>()});
    else if (py::isinstance<py::bytes>(value))
      out.push_back({name, std::string(value.cast<py::bytes>())});
    else
      out.push_back({name, py::array_t<double, py::array::c_style | py::array::forcecast>::ensure(value)
                               .cast<std::vector<double>>()});
  }
  return out;
}

/// variables: (name, dims, dtype name, attributes, shape, values or None) per variable, values as
/// stored; None: text, or values not given (reading them is an error).
std::unique_ptr<HeldDataset> held_dataset_of(const std::string& name, const py::list& variables,
                                             const py::dict& attributes) {
  auto held = std::make_unique<HeldDataset>();
  held->dataset.name = name;
  held->dataset.attributes = attributes_of(attributes);
  for (const py::handle& item : variables) {
    const py::tuple t = py::reinterpret_borrow<py::tuple>(item);
    MemoryVariable var;
    var.name = t[0].cast<std::string>();
    var.dims = t[1].cast<std::vector<std::string>>();
    var.type = stored_type_of(t[2].cast<std::string>(), var.name);
    var.attributes = attributes_of(t[3].cast<py::dict>());
    var.shape = t[4].cast<std::vector<std::size_t>>();
    if (var.shape.size() != var.dims.size())
      throw UsageError("variable '" + var.name + "': one length per dimension expected");
    if (var.type != StoredType::text && !t[5].is_none()) {
      DoubleArray values = DoubleArray::ensure(t[5]);
      if (!values || static_cast<std::size_t>(values.size()) !=
                         std::accumulate(var.shape.begin(), var.shape.end(), std::size_t{1}, std::multiplies<>()))
        throw UsageError("variable '" + var.name + "': values of its shape expected");
      var.values = values.data();
      held->arrays.push_back(std::move(values));
    }
    held->dataset.variables.push_back(std::move(var));
  }
  return held;
}

/// `latentlift analyze` on a dataset held in memory: the command line's reader (quantities,
/// units, checks) and pipeline, no netCDF-C; the fields per outer step as arrays.
/// The reader on a dataset held in memory without analysing it: its grid's dimensions (outer,
/// horizontal) and lengths; with check_sample, the quantities judged on sampled columns too.
py::dict read_dataset(const std::string& name, const py::list& variables, const py::dict& attributes,
                      const std::string& config_path, const std::vector<std::string>& overrides, bool check_sample) {
  std::unique_ptr<HeldDataset> held = held_dataset_of(name, variables, attributes);
  std::vector<std::string> outer_dims, horizontal_dims;
  std::vector<std::size_t> outer_shape, horizontal_shape;
  {
    py::gil_scoped_release release;
    const RunConfig config = load_config(config_path, overrides);
    const std::unique_ptr<InputDataset> input =
        InputDataset::from_memory(held->dataset, config.aliases, config.conventions, check_sample);
    for (const OuterDimension& dim : input->grid().outer) {
      outer_dims.push_back(dim.name);
      outer_shape.push_back(dim.length);
    }
    for (const Dimension& dim : input->grid().horizontal) {
      horizontal_dims.push_back(dim.name);
      horizontal_shape.push_back(dim.length);
    }
  }
  py::dict out;
  out["outer_dims"] = outer_dims;
  out["outer_shape"] = outer_shape;
  out["horizontal_dims"] = horizontal_dims;
  out["horizontal_shape"] = horizontal_shape;
  return out;
}

py::dict analyze_dataset(const std::string& name, const py::list& variables, const py::dict& attributes,
                         const std::string& config_path, const std::vector<std::string>& overrides, bool level_fields,
                         int threads, bool part_of_dataset) {
  std::unique_ptr<HeldDataset> held = held_dataset_of(name, variables, attributes);
  std::map<std::string, std::vector<float>> real;
  std::map<std::string, std::vector<std::int8_t>> byte;
  std::vector<std::string> outer_dims, horizontal_dims;
  std::vector<std::size_t> outer_shape, horizontal_shape;
  std::string vertical_dim;
  std::size_t n_steps = 0, n_columns = 0, nz = 0;
  RunSummary summary;
  {
    py::gil_scoped_release release;
    PipelineOptions options;
    options.config = load_config(config_path, overrides);
    options.level_fields = level_fields;
    options.threads = threads;
    options.part_of_dataset = part_of_dataset;
    const std::unique_ptr<InputDataset> read =
        InputDataset::from_memory(held->dataset, options.config.aliases, options.config.conventions, !part_of_dataset);
    const InputDataset& input = *read;
    const GridDescription& grid = input.grid();
    n_steps = grid.n_steps;
    n_columns = grid.n_columns;
    nz = grid.vertical.length;
    for (const OuterDimension& dim : grid.outer) {
      outer_dims.push_back(dim.name);
      outer_shape.push_back(dim.length);
    }
    for (const Dimension& dim : grid.horizontal) {
      horizontal_dims.push_back(dim.name);
      horizontal_shape.push_back(dim.length);
    }
    vertical_dim = grid.vertical.name;
    const double nan = std::numeric_limits<double>::quiet_NaN();
    for (const std::string& f : real_field_names()) real[f].assign(n_steps * n_columns, static_cast<float>(nan));
    for (const std::string& f : byte_field_names()) byte[f].assign(n_steps * n_columns, kByteMissing);
    if (level_fields) {
      for (const std::string& f : real_level_field_names()) real[f].assign(n_steps * nz * n_columns, static_cast<float>(nan));
      for (const std::string& f : byte_level_field_names()) byte[f].assign(n_steps * nz * n_columns, kByteMissing);
    }
    auto maps = [&](std::size_t step, const FieldSet& fields) {
      for (const auto& [f, values] : fields.real) std::copy(values.begin(), values.end(), real[f].begin() + step * n_columns);
      for (const auto& [f, values] : fields.byte) std::copy(values.begin(), values.end(), byte[f].begin() + step * n_columns);
    };
    // Per-level blocks [level][column in block] into [step][level][column].
    auto levels = [&](std::size_t step, const LevelFieldBlock& block) {
      const std::size_t count = block.range.count;
      auto place = [&](const auto& from, auto& to) {
        for (std::size_t k = 0; k < nz; ++k)
          std::copy_n(from.begin() + k * count, count, to.begin() + (step * nz + k) * n_columns + block.range.begin);
      };
      for (const auto& [f, values] : block.real) place(values, real.at(f));
      for (const auto& [f, values] : block.byte) place(values, byte.at(f));
    };
    summary = analyze_in_memory(input, options, maps, levels);
  }
  py::dict fields;
  auto as_array = [&](const auto& values, bool per_level) {
    using T = typename std::decay_t<decltype(values)>::value_type;
    std::vector<py::ssize_t> shape = {static_cast<py::ssize_t>(n_steps)};
    if (per_level) shape.push_back(static_cast<py::ssize_t>(nz));
    shape.push_back(static_cast<py::ssize_t>(n_columns));
    py::array_t<T> out(shape);
    std::copy(values.begin(), values.end(), out.mutable_data());
    return out;
  };
  auto is_level_field = [](const std::string& f) {
    for (const auto* names : {&real_level_field_names(), &byte_level_field_names()})
      if (std::find(names->begin(), names->end(), f) != names->end()) return true;
    return false;
  };
  for (const auto& [f, values] : real) fields[py::str(f)] = as_array(values, is_level_field(f));
  for (const auto& [f, values] : byte) fields[py::str(f)] = as_array(values, is_level_field(f));
  py::dict out;
  out["fields"] = fields;
  out["outer_dims"] = outer_dims;
  out["outer_shape"] = outer_shape;
  out["vertical_dim"] = vertical_dim;
  out["horizontal_dims"] = horizontal_dims;
  out["horizontal_shape"] = horizontal_shape;
  out["qc"] = qc_dict(summary.qc);
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

/// `latentlift column` on a dataset held in memory (see analyze_dataset), as text.
std::string column_report(const std::string& name, const py::list& variables, const py::dict& attributes, double lat,
                          double lon, std::size_t time, const std::string& format, const std::string& config_path,
                          const std::vector<std::string>& overrides) {
  std::unique_ptr<HeldDataset> held = held_dataset_of(name, variables, attributes);
  py::gil_scoped_release release;
  return cli::column_report(held->dataset, lat, lon, time, format, config_path, overrides);
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
  m.def("analyze_dataset", &analyze_dataset, py::arg("name"), py::arg("variables"), py::arg("attributes"),
        py::arg("config_path"), py::arg("overrides"), py::arg("level_fields"), py::arg("threads"),
        py::arg("part_of_dataset") = false,
        "latentlift analyze on a dataset held in memory (variables as stored: name, dims, dtype, attributes, shape, "
        "values): fields per outer step, [step, (level,) column], and the QC counts");
  m.def("read_dataset", &read_dataset, py::arg("name"), py::arg("variables"), py::arg("attributes"),
        py::arg("config_path"), py::arg("overrides"), py::arg("check_sample"),
        "The reader on a dataset held in memory, no analysis: its grid's dimensions (and the sample check)");
  m.def("write_output_template", &write_output_template, py::arg("inputs"), py::arg("output"),
        py::arg("config_path"), py::arg("overrides"), py::arg("level_fields"), py::arg("history"),
        "The output file of analyze without field values (variables, attributes, coordinates, grid mapping)");
  m.def("column_report", &column_report, py::arg("name"), py::arg("variables"), py::arg("attributes"),
        py::arg("lat"), py::arg("lon"), py::arg("time"), py::arg("format"), py::arg("config_path"),
        py::arg("overrides"), "latentlift column on a dataset held in memory, as text");
}
