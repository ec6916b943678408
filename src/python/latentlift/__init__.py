"""latentlift for Python: Normand's latent instability of every column, on NumPy arrays and
xarray datasets (NumPy- or Dask-backed, on one machine or a Dask cluster).

    import latentlift, xarray
    fields = latentlift.analyze(xarray.open_dataset("model.nc"))

``analyze`` and ``column`` apply the command line's own rules (the C++ reader, unit
conversions, checks, writer and column report run in process), so their results and error
messages are those of ``latentlift analyze`` and ``latentlift column``. ``analyze_columns``
runs the column kernel on plain arrays.

The fields are diagnostic guidance; official warnings of the meteorological service prevail.
"""

from latentlift._core import Error, InputError, UsageError, __version__
from latentlift.columns import analyze_columns
from latentlift.datasets import analyze, column

__all__ = ["analyze", "column", "analyze_columns", "Error", "InputError", "UsageError", "__version__"]
