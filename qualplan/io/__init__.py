"""File formats -> numeric-core types (no database, no HTTP).

Readers of measured records and spectra, each returning a frozen dataclass in the
core's units with the declared unit and the file's metadata:

- :func:`read_csv_time_history`, :func:`read_csv_spectrum`
- :func:`read_npy_time_history`
- :func:`read_wav_time_history` (with a calibration factor)
- :func:`read_mat_time_history` (MATLAB v4-v7.2)
- :func:`read_uff58` (universal file format, dataset 58, via pyuff)

Units are declared by the caller, never guessed.

Streaming, multi-channel: :mod:`qualplan.io.streams` (``open_record`` and one
``open_*`` per format) reads long records in chunks, channels by column.
"""

from qualplan.io.readers import (
    DEFAULT_TIME_TOLERANCE,
    Spectrum,
    TimeHistory,
    read_csv_spectrum,
    read_csv_time_history,
    read_mat_time_history,
    read_npy_time_history,
    read_uff58,
    read_wav_time_history,
)

__all__ = [
    "DEFAULT_TIME_TOLERANCE",
    "Spectrum",
    "TimeHistory",
    "read_csv_spectrum",
    "read_csv_time_history",
    "read_mat_time_history",
    "read_npy_time_history",
    "read_uff58",
    "read_wav_time_history",
]
