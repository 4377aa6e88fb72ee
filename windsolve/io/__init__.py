"""Every file windsolve reads or writes, one job a module.

- :mod:`~windsolve.io.atomic`: the one atomic-write path of every output file
  (``.NAME.tmp-PID`` renamed over NAME when complete), one-line errors, input text.
- :mod:`~windsolve.io.hdf5`: HDF5 files built in memory, and the checks of a file's
  layout, units and values when it is read.
- :mod:`~windsolve.io.csvfile`: CSV tables written atomically.
- :mod:`~windsolve.io.tomlfile`: TOML text read with a one-line error, and its writer.

(``csvfile`` and ``tomlfile``, not ``csv`` and ``toml``, so that no module of the
package has the name of a standard-library or third-party one.)
"""

from .atomic import (
    atomic_write,
    check_output_path,
    output_error,
    read_input_text,
    remove_stale_temporaries,
    temporary_name,
    write_bytes,
    write_figure,
    write_text,
)
from .csvfile import write_csv
from .hdf5 import (
    CONSISTENCY_RTOL,
    KINDS,
    check_photosphere,
    check_values,
    column,
    dataset,
    dataset_unit,
    file_kind,
    group,
    hdf5_kind,
    open_hdf5,
    parse_unit,
    plain,
    read_strings,
    require_kind,
    stamp,
    strings,
    text_attr,
    write_hdf5,
)
from .tomlfile import dumps, parse_toml

__all__ = [
    "atomic_write", "check_output_path", "output_error", "read_input_text",
    "remove_stale_temporaries", "temporary_name", "write_bytes", "write_figure", "write_text",
    "write_csv",
    "CONSISTENCY_RTOL", "KINDS", "check_photosphere", "check_values", "column", "dataset",
    "dataset_unit", "file_kind", "group", "hdf5_kind", "open_hdf5", "parse_unit", "plain",
    "read_strings", "require_kind", "stamp", "strings", "text_attr", "write_hdf5",
    "dumps", "parse_toml",
]
