"""Apache Arrow IPC bodies for the client: write request streams, read answer streams into numpy.

pyarrow is imported on first use; without it the client sends JSON (:func:`available`).
Layout of the streams: ``docs/api.md`` ("Apache Arrow bodies and answers").
"""

from __future__ import annotations

import importlib.util
from dataclasses import dataclass
from typing import Any

import numpy as np
import orjson

from service.contract.arrow_layout import ANSWER_METADATA_KEY, DATA_COLUMNS, REQUEST_METADATA_KEY

ARROW_MIN_POINTS = 2_000
"""Series of at least this many points are sent as Arrow: past the measured crossover (about 1,000 points; `python -m tests.bench.bench_wire`)."""


def available() -> bool:
    """Whether pyarrow can be imported here."""
    return importlib.util.find_spec("pyarrow") is not None


def request_stream(body: dict[str, Any]) -> bytes:
    """One request body (``x``, ``y``, optional ``weights`` as float64 arrays, other fields) as an Arrow IPC stream.

    Parameters
    ----------
    body : dict
        The JSON body the client would send, with numpy arrays for the data.

    Returns
    -------
    bytes
        A stream with the columns ``x``, ``y`` (and ``weights``) and the other
        fields as JSON in the schema metadata key ``bandwise.request``.
    """
    import pyarrow as pa

    columns = {name: pa.array(np.ascontiguousarray(body[name], dtype=float)) for name in DATA_COLUMNS if body.get(name) is not None}
    fields = {key: value for key, value in body.items() if key not in DATA_COLUMNS}
    schema = pa.schema([pa.field(name, pa.float64(), nullable=False) for name in columns], metadata={REQUEST_METADATA_KEY: orjson.dumps(fields, option=orjson.OPT_SERIALIZE_NUMPY)})
    batch = pa.RecordBatch.from_arrays(list(columns.values()), schema=schema)
    sink = pa.BufferOutputStream()
    with pa.ipc.new_stream(sink, schema) as writer:
        writer.write_batch(batch)
    encoded: bytes = sink.getvalue().to_pybytes()
    return encoded


@dataclass(frozen=True)
class ArrowAnswer:
    """An answer read from an Arrow stream.

    Attributes
    ----------
    fields : dict
        Everything that is not an array (``bandwidth``, ``diagnostics``, ``warnings``, ...), as in the JSON answer.
    arrays : dict of str to numpy.ndarray
        Each array by its JSON path (``"curve.estimate"``, ``"predictions.x"``, ...);
        float64 with NaN where the JSON answer has null (read-only views of the
        answer's buffer when there is no null), bool for ``predictions.extrapolated``.
    """

    fields: dict[str, Any]
    arrays: dict[str, np.ndarray]


def read_answer(content: bytes) -> ArrowAnswer:
    """Read an answer stream (``Accept: application/vnd.apache.arrow.stream``)."""
    import pyarrow as pa

    table = pa.ipc.open_stream(pa.py_buffer(content)).read_all()
    metadata = table.schema.metadata or {}
    fields = orjson.loads(metadata.get(ANSWER_METADATA_KEY.encode(), b"{}"))
    arrays: dict[str, np.ndarray] = {}
    for name in table.column_names:
        values = table.column(name).chunk(0).flatten()
        arrays[name] = values.to_numpy(zero_copy_only=False)
    return ArrowAnswer(fields, arrays)
