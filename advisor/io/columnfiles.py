"""Data-frame columns as raw little-endian arrays, each in the smallest form that keeps every bit.

The storage of :mod:`advisor.io.featurecache`.  A column is written a chunk at a time
(:class:`ColumnWriter`) and read back from memory maps (:mod:`advisor.io.columnread`); nothing
is pickled or executed.  Every value becomes an integer *key* that keeps its bits (a float's bit
pattern, so -0.0, NaN and infinities survive; a time's step from the row before; an integer's
offset from its row number when that repeats more, as row pointers do; a string's index in a
table of strings), and the keys are stored:

* ``coded``: as codes into a table of the distinct keys, when that is smaller than the plain
  values.  A column with one distinct key is a constant (no codes at all); the codes of all the
  coded columns are packed side by side into shared integer *lanes* of the fewest bits they need
  (:func:`pack_lanes`), so a flag takes one bit and a reading with 800 distinct values ten;
* ``raw``: otherwise, as the values themselves: a float64 column that float32 holds exactly as
  float32, other floats as they are, any other key as int64.

Only bool, integer, float, datetime64 (naive or with a zone), categorical (string categories)
and string (object or ``str``) columns are kept; anything else is refused with TypeError.
"""

from __future__ import annotations

import math
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd

#: Most distinct keys a column is coded with; beyond it the column is written raw.
MAX_CODES = 1 << 20
#: Rows handled at once when a written column is converted or packed.
BLOCK_ROWS = 1 << 20
LANE_BITS = 64
#: A first chunk with at most this share of distinct values is coded.
REPEATING = 0.95


class DamagedEntry(ValueError):
    """Stored columns that do not decode (a file changed after it was written)."""


def _kind(series: pd.Series) -> tuple[str, dict]:
    """The kind of a column and what its dtype needs to be rebuilt."""
    dtype = series.dtype
    if isinstance(dtype, pd.CategoricalDtype):
        cats = dtype.categories
        if not all(isinstance(c, str) for c in cats):
            raise TypeError(f"column {series.name!r}: only string categories can be cached")
        return "category", {"ordered": bool(dtype.ordered), "categories_dtype": str(cats.dtype)}
    if isinstance(dtype, pd.DatetimeTZDtype):
        return "time", {"unit": dtype.unit, "tz": str(dtype.tz)}
    if isinstance(dtype, pd.StringDtype) or (isinstance(dtype, np.dtype) and dtype.kind == "O"):
        return "string", {"dtype": str(dtype)}
    if isinstance(dtype, np.dtype):
        if dtype.kind == "b":
            return "bool", {}
        if dtype.kind in "iu":
            return "int", {"dtype": dtype.str}
        if dtype.kind == "f":
            return "float", {"dtype": dtype.str}
        if dtype.kind == "M":
            return "time", {"unit": np.datetime_data(dtype.str)[0], "tz": None}
    raise TypeError(f"column {series.name!r}: cannot cache dtype {dtype}")


def _bits(distinct: int) -> int:
    return 0 if distinct <= 1 else math.ceil(math.log2(distinct))


def _fits_float32(values: np.ndarray) -> bool:
    x = np.asarray(values, dtype=np.float64)
    with np.errstate(over="ignore", invalid="ignore"):
        back = x.astype(np.float32).astype(np.float64)
    return bool(np.array_equal(back.view(np.int64), x.view(np.int64)))


class _Table:
    """Distinct int64 keys in order of first sight; ``codes(keys)`` maps keys to their positions."""

    def __init__(self) -> None:
        self.keys = np.empty(0, dtype=np.int64)
        self._sorted = np.empty(0, dtype=np.int64)
        self._order = np.empty(0, dtype=np.int64)

    def codes(self, keys: np.ndarray) -> np.ndarray:
        inverse, uniques = pd.factorize(keys)
        uniques = np.asarray(uniques, dtype=np.int64)
        pos = np.searchsorted(self._sorted, uniques)
        found = np.zeros(len(uniques), dtype=bool)
        if len(self._sorted):
            found = self._sorted[np.minimum(pos, len(self._sorted) - 1)] == uniques
        mapped = np.empty(len(uniques), dtype=np.int64)
        mapped[found] = self._order[pos[found]]
        new = uniques[~found]
        new_codes = np.arange(len(self.keys), len(self.keys) + len(new), dtype=np.int64)
        mapped[~found] = new_codes
        if len(new):
            self.keys = np.concatenate([self.keys, new])
            by_key = np.argsort(new, kind="stable")
            at = np.searchsorted(self._sorted, new[by_key])
            self._sorted = np.insert(self._sorted, at, new[by_key])
            self._order = np.insert(self._order, at, new_codes[by_key])
        return mapped[np.asarray(inverse)]


class ColumnWriter:
    """One column being written: keys made from each chunk, coded or raw (decided on the first chunk)."""

    def __init__(self, folder: Path, index: int, series: pd.Series) -> None:
        self.folder, self.index = folder, index
        self.name = str(series.name)
        self.kind, self.meta = _kind(series)
        self.dtype = series.dtype
        self.rows = 0
        self.encoding: str | None = None  # "coded" | "raw", decided on the first chunk
        self.raw_dtype = "<i8"
        self.offset = False  # int keys: value minus row number
        self.previous = 0  # time keys: the last time written
        self.firsts: list[int] = []  # time: the first value of each chunk
        self.table = _Table()
        self.strings: dict = {}  # string kind: value -> key
        self.category_sets: list[list[str]] = []
        self.chunk_sets: list[int] = []
        self.codes_dtype: np.dtype = np.dtype("<u2")
        self.fh: Any = None  # the open file of the column's codes or values

    # ------------------------------------------------------------------ keys
    def _keys(self, series: pd.Series, first_row: int) -> np.ndarray:
        n = len(series)
        if _kind(series) != (self.kind, self.meta):  # categories may differ from chunk to chunk
            raise ValueError(f"column {self.name!r} changed dtype between chunks: {self.dtype} -> {series.dtype}")
        if self.kind == "bool":
            return series.to_numpy().view(np.uint8).astype(np.int64)
        if self.kind == "float":
            values = series.to_numpy()
            return values.view(f"<i{values.dtype.itemsize}").astype(np.int64)
        if self.kind == "int":
            values = series.to_numpy()
            keys = values.view(np.int64) if values.dtype.kind == "u" and values.dtype.itemsize == 8 else values
            keys = keys.astype(np.int64)
            if self.encoding is None:  # first chunk: row pointers repeat as offsets from the row number
                shifted = keys - np.arange(first_row, first_row + n, dtype=np.int64)
                self.offset = len(pd.unique(shifted)) < len(pd.unique(keys))
            if self.offset:
                keys = keys - np.arange(first_row, first_row + n, dtype=np.int64)
            return keys
        if self.kind == "time":
            array = series.array
            values = np.asarray(array.asi8 if hasattr(array, "asi8") else series.to_numpy().view(np.int64))
            if n == 0:
                self.firsts.append(self.previous)
                return values.astype(np.int64)
            self.firsts.append(int(values[0]))
            with np.errstate(over="ignore"):
                steps = np.diff(values, prepend=np.int64(values[0] if not self.rows else self.previous))
            self.previous = int(values[-1])
            return steps.astype(np.int64)
        if self.kind == "category":
            cats = [str(c) for c in series.cat.categories]
            if cats not in self.category_sets:
                self.category_sets.append(cats)
            self.chunk_sets.append(self.category_sets.index(cats))
            return series.cat.codes.to_numpy().astype(np.int64)
        return self._string_keys(series)

    def _string_keys(self, series: pd.Series) -> np.ndarray:
        inverse, uniques = pd.factorize(series.to_numpy(dtype=object), use_na_sentinel=True)
        if (inverse < 0).any() and series.dtype == object:
            missing = series.to_numpy(dtype=object)[inverse < 0]
            if any(v is not None for v in missing):
                raise TypeError(f"column {self.name!r}: only None is kept as a missing string")
        mapping = np.empty(len(uniques) + 1, dtype=np.int64)
        for i, value in enumerate(uniques):
            if not isinstance(value, str):
                raise TypeError(f"column {self.name!r}: only strings can be cached, not {type(value).__name__}")
            mapping[i] = self.strings.setdefault(value, len(self.strings))
        mapping[-1] = -1  # missing
        return mapping[np.asarray(inverse)]

    # ------------------------------------------------------------------ writing
    def _path(self, suffix: str) -> Path:
        return self.folder / f"c{self.index:03d}.{suffix}"

    def add(self, series: pd.Series, first_row: int) -> None:
        keys = self._keys(series, first_row)
        n = len(keys)
        if self.encoding is None:
            self._choose(keys)
        if self.encoding == "coded":
            codes = self.table.codes(keys)
            if len(self.table.keys) > MAX_CODES:
                self._to_raw(pending=keys)
            else:
                if len(self.table.keys) > 65_536 and self.codes_dtype.itemsize == 2:
                    self._widen_codes()
                self.fh.write(codes.astype(self.codes_dtype).tobytes())
        else:
            self._write_raw(keys)
        self.rows += n

    def _choose(self, keys: np.ndarray) -> None:
        """Codes unless nearly every value of the first chunk is new (a continuous quantity).

        Later chunks repeat the values of the first (its table is paid once), so a column is coded
        on a hint of repetition; :meth:`finish` turns it raw if the codes and table cost more.
        """
        n, distinct = len(keys), len(pd.unique(keys))
        repeats = distinct <= REPEATING * n or n * _bits(distinct) / 8 + 8 * distinct <= n * self._raw_itemsize(keys)
        if self.kind in ("bool", "category", "string") or repeats:
            self.encoding = "coded"
            self.fh = self._path("codes.tmp").open("wb")
        else:
            self.encoding = "raw"
            self._open_raw(keys)

    def _raw_itemsize(self, keys: np.ndarray) -> int:
        if self.kind != "float":
            return 8
        size = np.dtype(self.meta["dtype"]).itemsize
        return 4 if size == 8 and _fits_float32(keys.view(np.float64)) else size

    def _open_raw(self, keys: np.ndarray) -> None:
        if self.kind == "float":
            size = self._raw_itemsize(keys)
            self.raw_dtype = f"<f{size}"
        self.fh = self._path("raw").open("wb")

    def _values(self, keys: np.ndarray) -> np.ndarray:
        """Float keys back to floats of the column's own width."""
        size = np.dtype(self.meta["dtype"]).itemsize
        return keys.astype(f"<i{size}").view(f"<f{size}")

    def _write_raw(self, keys: np.ndarray) -> None:
        if self.kind != "float":
            self.fh.write(keys.astype("<i8").tobytes())
            return
        values = self._values(keys)
        if self.raw_dtype == "<f4" and values.dtype.itemsize == 8 and not _fits_float32(values):
            self._rewrite(lambda block: block.astype("<f8"), "<f4", self._path("raw"))
            self.raw_dtype = "<f8"
        self.fh.write(values.astype(self.raw_dtype).tobytes())

    def _rewrite(self, convert, dtype, target: Path) -> None:
        """Convert what was written (``dtype`` in this column's open file) block by block into ``target``."""
        self.fh.close()
        source = Path(self.fh.name)
        tmp = source.with_suffix(".old")
        source.rename(tmp)
        with target.open("wb") as out:
            for block in _blocks(np.memmap(tmp, dtype=dtype, mode="r") if tmp.stat().st_size else np.empty(0, dtype)):
                out.write(convert(block).tobytes())
        tmp.unlink()
        self.fh = target.open("ab")

    def _widen_codes(self) -> None:
        self._rewrite(lambda block: block.astype("<u4"), self.codes_dtype, self._path("codes.tmp"))
        self.codes_dtype = np.dtype("<u4")

    def _to_raw(self, pending: np.ndarray | None = None) -> None:
        """Too many distinct keys (or codes cost more): write the column as plain values instead."""
        table = self.table.keys
        if self.kind == "float":
            self._open_raw_dtype(table)
            convert = lambda block: self._values(table[block]).astype(self.raw_dtype)  # noqa: E731
        else:
            convert = lambda block: table[block].astype("<i8")  # noqa: E731
        self._rewrite(convert, self.codes_dtype, self._path("raw"))
        self._path("codes.tmp").unlink(missing_ok=True)
        self.encoding, self.table = "raw", _Table()
        if pending is not None:
            self._write_raw(pending)

    def _open_raw_dtype(self, table: np.ndarray) -> None:
        size = np.dtype(self.meta["dtype"]).itemsize
        self.raw_dtype = "<f4" if size == 8 and _fits_float32(self._values(table)) else f"<f{size}"

    def finish(self) -> dict:
        """Close the column; a coded column costlier than its plain values becomes raw."""
        if self.encoding is None:  # no chunk had rows: nothing was chosen
            self._choose(np.empty(0, dtype=np.int64))
        if self.encoding == "coded" and self.kind in ("float", "int", "time"):
            distinct = len(self.table.keys)
            if self.kind != "float":
                itemsize = 8
            else:
                itemsize = 4 if self._would_be_float32() else np.dtype(self.meta["dtype"]).itemsize
            if self.rows * _bits(distinct) / 8 + 8 * distinct > self.rows * itemsize:
                self._to_raw()
        self.fh.close()
        meta = {"name": self.name, "kind": self.kind, "encoding": self.encoding, **self.meta}
        if self.kind == "int":
            meta["offset"] = self.offset
        if self.kind == "time":
            meta["firsts"] = self.firsts
        if self.kind == "category":
            meta["category_sets"], meta["chunk_sets"] = self.category_sets, self.chunk_sets
        if self.kind == "string":
            meta["strings"] = list(self.strings)
        if self.encoding == "raw":
            meta.update(file=self._path("raw").name, raw_dtype=self.raw_dtype)
        else:
            meta.update(distinct=len(self.table.keys), bits=_bits(len(self.table.keys)), table=self._path("keys").name)
            self.table.keys.astype("<i8").tofile(self._path("keys"))
        return meta

    def _would_be_float32(self) -> bool:
        return np.dtype(self.meta["dtype"]).itemsize == 8 and _fits_float32(self._values(self.table.keys))

    def codes_file(self) -> tuple[Path, np.dtype]:
        return self._path("codes.tmp"), self.codes_dtype


def _blocks(array: np.ndarray):
    for start in range(0, len(array), BLOCK_ROWS):
        yield np.asarray(array[start : start + BLOCK_ROWS])


def _lane_dtype(bits: int) -> str:
    return next(f"<u{size}" for size in (1, 2, 4, 8) if bits <= 8 * size)


def pack_lanes(folder: Path, writers: list[ColumnWriter], metas: list[dict], rows: int) -> list[dict]:
    """Pack the codes of the coded columns side by side into the fewest lanes (first fit, widest first).

    Sets ``lane`` and ``shift`` in each coded column's meta; returns the lanes' metas.
    """
    coded = [(m["bits"], i) for i, m in enumerate(metas) if m["encoding"] == "coded" and m["bits"] > 0]
    lanes: list[list[int]] = []
    used: list[int] = []
    for bits, i in sorted(coded, key=lambda c: (-c[0], c[1])):
        lane = next((k for k, u in enumerate(used) if u + bits <= LANE_BITS), None)
        if lane is None:
            lanes.append([])
            used.append(0)
            lane = len(lanes) - 1
        metas[i]["lane"], metas[i]["shift"] = lane, used[lane]
        used[lane] += bits
        lanes[lane].append(i)
    out = []
    for k, members in enumerate(lanes):
        dtype = _lane_dtype(used[k])
        path = folder / f"lane{k:02d}.bin"
        sources = []
        for i in members:
            codes_path, codes_dtype = writers[i].codes_file()
            sources.append((np.memmap(codes_path, dtype=codes_dtype, mode="r", shape=(rows,)), metas[i]["shift"]))
        with path.open("wb") as fh:
            for start in range(0, rows, BLOCK_ROWS):
                word = np.zeros(min(BLOCK_ROWS, rows - start), dtype=np.uint64)
                for codes, shift in sources:
                    word |= np.asarray(codes[start : start + BLOCK_ROWS]).astype(np.uint64) << np.uint64(shift)
                fh.write(word.astype(dtype).tobytes())
        del sources
        out.append({"file": path.name, "dtype": dtype, "bits": used[k]})
    for writer, meta in zip(writers, metas, strict=True):
        if meta["encoding"] == "coded":
            writer.codes_file()[0].unlink(missing_ok=True)
    return out
