"""Trajectories in columnar files: Parquet and Arrow IPC (Feather v2), read with pyarrow.

Long logs of real-time simulations (hours at 1 kHz) load several times faster from these
than from CSV: the numbers are stored as binary float64, nothing is parsed. The columns and
every rule are those of the CSV form (DESIGN §4): the same names and units, the same
mapping (trajectory._map_columns), the same sample rules (samples.first_fault); a fault
is named by its row (1 = the first data row) and column.
"""

from __future__ import annotations

from collections.abc import Iterator
from contextlib import contextmanager
from pathlib import Path

import numpy as np

from reachgate.errors import ReachgateError
from reachgate.model.csv_text import file_faults

#: File name endings read as columnar files, and their format.
COLUMNAR_SUFFIXES = {
    ".parquet": "Parquet",
    ".pq": "Parquet",
    ".feather": "Arrow IPC (Feather)",
    ".arrow": "Arrow IPC (Feather)",
    ".ipc": "Arrow IPC (Feather)",
}


def is_columnar(path: str | Path) -> bool:
    return Path(path).suffix.lower() in COLUMNAR_SUFFIXES


@contextmanager
def _reading(path: Path, label: str) -> Iterator[str]:
    """Turn a fault of reading the file into one ReachgateError naming it; yields its kind."""
    import pyarrow as pa

    kind = COLUMNAR_SUFFIXES[path.suffix.lower()]
    try:
        with file_faults(label):
            yield kind
    except (pa.ArrowException, OSError) as error:
        first_line = str(error).splitlines()[0] if str(error) else type(error).__name__
        raise ReachgateError(f"{label}: not a readable {kind} file ({first_line})") from None


def read_table(path: Path, label: str):
    """The whole file as a pyarrow Table. Raises ReachgateError naming the file and fault."""
    with _reading(path, label) as kind:
        if kind == "Parquet":
            import pyarrow.parquet as pq

            return pq.read_table(path, use_threads=False)  # one thread: a scan runs one per core
        import pyarrow.feather as feather

        return feather.read_table(path)


def column_names(path: Path, label: str) -> tuple[str, ...]:
    """The column names of a columnar file, from its schema (no value is read)."""
    import pyarrow as pa

    with _reading(path, label) as kind:
        if kind == "Parquet":
            import pyarrow.parquet as pq

            schema = pq.read_schema(path)
        else:
            with pa.memory_map(str(path)) as source:
                schema = pa.ipc.open_file(source).schema
    return tuple(str(name).strip() for name in schema.names)


def column_values(table, names: tuple[str, ...], use: tuple[int, ...], label: str) -> np.ndarray:
    """The columns `use` (indices into names) of table as one (N, len(use)) float64 array.

    Refuses, by column name, a column that holds no numbers (text, dates) and, by row and
    column, the first empty (null) value.
    """
    import pyarrow as pa

    # Column k lands contiguous in block[k], chunk by chunk (a float64 chunk without nulls is
    # a view, so each value is copied once); the (N, C) result is block's transpose.
    block = np.empty((len(use), table.num_rows))
    for k, index in enumerate(use):
        column = table.column(index)
        name = names[index]
        if not (pa.types.is_floating(column.type) or pa.types.is_integer(column.type)):
            raise ReachgateError(
                f"{label}, column {name}: holds {column.type}, not numbers (store float64)"
            )
        if column.null_count:
            row = int(np.argmax(column.is_null().to_numpy(zero_copy_only=False)))
            raise ReachgateError(f"{label} row {row + 1}, column {name}: empty value (null)")
        at = 0
        for chunk in column.chunks:
            block[k, at : at + len(chunk)] = chunk.to_numpy(zero_copy_only=False)
            at += len(chunk)
    return block.T
