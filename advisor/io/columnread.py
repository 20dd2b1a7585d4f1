"""Reading the columns :mod:`advisor.io.columnfiles` wrote: memory-mapped, decoded a range of rows at a time."""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np
import pandas as pd

from advisor.io.columnfiles import DamagedEntry


def _expect_size(path: Path, size: int) -> None:
    if not path.is_file() or path.stat().st_size != size:
        raise DamagedEntry(f"{path.name}: missing or of the wrong size")


def _map(path: Path, dtype: str, rows: int) -> np.ndarray:
    _expect_size(path, rows * np.dtype(dtype).itemsize)
    if rows == 0:
        return np.empty(0, dtype=dtype)
    return np.memmap(path, dtype=dtype, mode="r", shape=(rows,))


def map_lanes(folder: Path, lanes: list[dict], rows: int) -> list[np.ndarray]:
    """The lanes of an entry, memory-mapped (DamagedEntry when a file is missing or cut)."""
    out = []
    for lane in lanes:
        if lane["dtype"] not in ("<u1", "<u2", "<u4", "<u8") or not 0 < lane["bits"] <= 8 * int(lane["dtype"][2:]):
            raise DamagedEntry("bad lane")
        out.append(_map(folder / Path(lane["file"]).name, lane["dtype"], rows))
    return out


class ColumnReader:
    """One stored column, memory-mapped; :meth:`chunk` decodes a range of rows to what was written."""

    def __init__(self, folder: Path, meta: dict, rows: int, lanes: list[np.ndarray], chunks: int) -> None:
        self.meta, self.rows = meta, rows
        self.name: str = meta["name"]
        self.kind: str = meta["kind"]
        if self.kind not in ("bool", "int", "float", "time", "category", "string"):
            raise DamagedEntry(f"unknown kind {self.kind!r}")
        self.codes: np.ndarray | None = None
        self.table: np.ndarray | None = None
        self.raw: np.ndarray | None = None
        self.shift = self.mask = 0
        if meta["encoding"] == "coded":
            distinct, bits = int(meta["distinct"]), int(meta["bits"])
            path = folder / Path(meta["table"]).name
            _expect_size(path, 8 * distinct)
            self.table = np.fromfile(path, dtype="<i8")
            if bits != (0 if distinct <= 1 else math.ceil(math.log2(distinct))) or (rows and not distinct):
                raise DamagedEntry(f"{self.name}: bits do not match the table")
            if bits:
                lane = lanes[int(meta["lane"])]
                shift = int(meta["shift"])
                if not 0 <= shift <= 8 * lane.dtype.itemsize - bits:
                    raise DamagedEntry(f"{self.name}: bad shift")
                self.codes, self.shift, self.mask = lane, shift, (1 << bits) - 1
        elif meta["encoding"] == "raw":
            if meta["raw_dtype"] not in ("<i8", "<f2", "<f4", "<f8"):
                raise DamagedEntry(f"{self.name}: bad raw dtype")
            self.raw = _map(folder / Path(meta["file"]).name, meta["raw_dtype"], rows)
        else:
            raise DamagedEntry(f"{self.name}: unknown encoding")
        if self.kind == "time" and len(meta["firsts"]) != chunks:
            raise DamagedEntry(f"{self.name}: a first time per chunk expected")
        if self.kind == "category":
            sets = meta["category_sets"]
            self.categories = [pd.Index(s, dtype=meta["categories_dtype"]) for s in sets]
            if len(meta["chunk_sets"]) != chunks or any(not 0 <= k < len(sets) for k in meta["chunk_sets"]):
                raise DamagedEntry(f"{self.name}: bad categories")
        if self.kind == "string":
            self.strings = np.array([*meta["strings"], None], dtype=object)

    def _keys(self, start: int, stop: int) -> np.ndarray:
        if self.raw is not None:
            return np.array(self.raw[start:stop])
        assert self.table is not None
        if self.codes is None:
            return np.full(stop - start, self.table[0] if len(self.table) else 0, dtype=np.int64)
        codes = np.asarray(self.codes[start:stop])
        word = codes.dtype.type
        if self.shift or self.mask != np.iinfo(codes.dtype).max:
            codes = (codes >> word(self.shift)) & word(self.mask)
        index = codes.view(np.int64) if codes.dtype.itemsize == 8 else codes.astype(np.intp)
        try:
            return self.table.take(index)
        except IndexError:
            raise DamagedEntry(f"{self.name}: a code beyond its table") from None

    def chunk(self, number: int, start: int, stop: int):
        """Rows ``[start, stop)`` (chunk ``number``) as an array of the written dtype."""
        keys = self._keys(start, stop)
        meta = self.meta
        if self.kind == "float":
            dtype = np.dtype(meta["dtype"])
            if self.raw is not None:
                return keys.astype(dtype)
            return keys.astype(f"<i{dtype.itemsize}").view(dtype)
        if self.kind == "bool":
            return keys.astype(bool)
        if self.kind == "int":
            if meta["offset"]:
                keys = keys + np.arange(start, stop, dtype=np.int64)
            dtype = np.dtype(meta["dtype"])
            return keys.view(dtype) if dtype.itemsize == 8 else keys.astype(dtype)
        if self.kind == "time":
            if len(keys):
                keys[0] = 0
            with np.errstate(over="ignore"):
                ns = np.cumsum(keys, dtype=np.int64) + np.int64(meta["firsts"][number])
            values = ns.view(f"datetime64[{meta['unit']}]")
            if meta["tz"] is None:
                return values
            return pd.DatetimeIndex(values).tz_localize("UTC").tz_convert(meta["tz"]).array
        if self.kind == "category":
            categories = self.categories[meta["chunk_sets"][number]]
            try:
                return pd.Categorical.from_codes(keys, categories=categories, ordered=meta["ordered"])
            except ValueError:
                raise DamagedEntry(f"{self.name}: a code beyond its categories") from None
        if len(keys) and (keys.min() < -1 or keys.max() >= len(self.strings) - 1):
            raise DamagedEntry(f"{self.name}: a string beyond its table")
        values = self.strings[keys]
        if meta["dtype"] == "object":
            return values
        return pd.array(values, dtype=pd.api.types.pandas_dtype(meta["dtype"]))
