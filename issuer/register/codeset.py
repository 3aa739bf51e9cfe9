"""A set of one series' codes, held compactly in memory (numpy, no database): the
reconciliation of a stocktake tests whole arrays of scans against it at once.
:func:`issuer.register.stocktake.held_codes` fills one per status from one query."""

from __future__ import annotations

from collections.abc import Iterable
from typing import Any


class CodeSet:
    """A set of one series' codes held as one sorted numpy array: a million codes cost a
    few megabytes, not a million Python strings, and testing a whole array of codes is
    one ``searchsorted``. Codes of one series share their prefix and suffix and draw what
    lies between from the series' symbols, so each code is kept as one integer (the
    symbols' ranks as digits: the order of the text) when it fits in 64 bits; otherwise
    as fixed-width bytes or text."""

    def __init__(
        self, codes: Any, *, prefix: str = "", suffix: str = "", width: int = 1, symbols: str = ""
    ) -> None:
        import numpy as np

        self.prefix, self.suffix = prefix.encode("utf-8"), suffix.encode("utf-8")
        self.symbols = symbols
        array = np.asarray(codes)
        if array.size == 0:
            array = np.array([], dtype=f"S{width}")  # an empty set keeps its series' form
        elif array.dtype.kind not in "SU":
            array = np.array([str(code) for code in array.tolist()], dtype=str)
        self.width = array.dtype.itemsize if array.dtype.kind == "S" else 0
        self.middle = self.width - len(self.prefix) - len(self.suffix)
        alphabet = np.array(sorted(set(symbols.encode("ascii"))), dtype=np.uint8) if symbols.isascii() else None
        self.bits = max(1, int(alphabet.size - 1).bit_length()) if alphabet is not None and alphabet.size else 0
        self.packed = array.dtype.kind == "S" and self.middle > 0 and 0 < self.bits * self.middle <= 64
        if self.packed:
            assert alphabet is not None
            self.alphabet = alphabet
            self.rank = np.full(256, -1, dtype=np.int16)
            self.rank[alphabet] = np.arange(alphabet.size, dtype=np.int16)
        keys = self._pack(array)[0] if self.packed else array
        keys = np.sort(keys)
        if keys.size > 1:
            keys = keys[np.concatenate(([True], keys[1:] != keys[:-1]))]
        self.array = keys

    def _pack(self, values: Any) -> tuple[Any, Any]:
        """Fixed-width codes as integers of the symbols between prefix and suffix, and
        which of them are made of the series' symbols at all."""
        import numpy as np

        start = len(self.prefix)
        ranks = self.rank[values.view(np.uint8).reshape(-1, self.width)[:, start: start + self.middle]]
        fits = (ranks >= 0).all(axis=1)
        keys = np.zeros(ranks.shape[0], dtype=np.uint64)
        for column in range(self.middle):
            keys = (keys << np.uint64(self.bits)) | ranks[:, column].clip(0).astype(np.uint64)
        return keys, fits

    def _unpack(self, keys: Any) -> list[str]:
        import numpy as np

        rows = np.empty((keys.size, self.width + 1), dtype=np.uint8)
        start = len(self.prefix)
        rows[:, :start] = np.frombuffer(self.prefix, dtype=np.uint8)
        mask = np.uint64((1 << self.bits) - 1)
        for column in range(self.middle):
            shift = np.uint64(self.bits * (self.middle - 1 - column))
            rows[:, start + column] = self.alphabet[((keys >> shift) & mask).astype(np.intp)]
        rows[:, start + self.middle: -1] = np.frombuffer(self.suffix, dtype=np.uint8)
        rows[:, -1] = ord("\n")
        return rows.tobytes().decode("ascii").split("\n")[:-1] if keys.size else []

    @classmethod
    def from_lines(
        cls, text: str | None, *, prefix: str = "", suffix: str = "", width: int = 1, symbols: str = ""
    ) -> CodeSet:
        """Codes joined by newlines, as the database hands them back."""
        import numpy as np

        form: dict[str, Any] = {"prefix": prefix, "suffix": suffix, "width": width, "symbols": symbols}
        if not text:
            return cls(np.array([], dtype="S1"), **form)
        data = text.encode("utf-8")
        first = data.find(b"\n")
        width = len(data) if first < 0 else first
        if text.isascii() and (len(data) + 1) % (width + 1) == 0:
            rows = np.frombuffer(data + b"\n", dtype=np.uint8).reshape(-1, width + 1)
            if (rows[:, width] == ord("\n")).all():
                codes = np.ascontiguousarray(rows[:, :width]).view(f"S{width}").ravel()
                return cls(codes, **form)
        return cls(np.array(text.split("\n"), dtype=str), **form)

    def _keys(self, values: Any) -> tuple[Any, Any]:
        """``values`` in this set's form, and which of them could be members at all."""
        import numpy as np

        values = np.asarray(values)
        if values.size == 0:
            return (np.zeros(0, dtype=np.uint64) if self.packed else values), np.zeros(0, dtype=bool)
        if self.packed:
            if values.dtype.kind != "S" or values.dtype.itemsize != self.width:
                values = np.char.encode(values.astype(str), "utf-8") if values.dtype.kind == "U" else values
                fits = np.char.str_len(values) == self.width
                values = values.astype(f"S{self.width}")
            else:
                fits = np.ones(values.size, dtype=bool)
            rows = values.view(np.uint8).reshape(-1, self.width)
            if self.prefix:
                fits &= (rows[:, : len(self.prefix)] == np.frombuffer(self.prefix, dtype=np.uint8)).all(axis=1)
            if self.suffix:
                fits &= (rows[:, self.width - len(self.suffix):] == np.frombuffer(self.suffix, dtype=np.uint8)).all(axis=1)
            keys, made = self._pack(values)
            return keys, fits & made
        kind = self.array.dtype.kind
        if values.dtype.kind != kind:
            values = np.char.encode(values, "utf-8") if kind == "S" else np.char.decode(values, "utf-8")
        return values, np.ones(values.size, dtype=bool)

    def contains(self, values: Any) -> Any:
        """For each code of ``values`` (an array of codes), whether it is in the set."""
        keys, fits = self._keys(values)
        return self.contains_keys(keys) & fits

    def contains_keys(self, keys: Any) -> Any:
        """For each of ``keys`` (another set's ``array``, of the same series), whether it is here."""
        import numpy as np

        if self.array.size == 0 or keys.size == 0:
            return np.zeros(keys.shape, dtype=bool)
        at = np.searchsorted(self.array, keys)
        at[at == self.array.size] = 0
        return self.array[at] == keys

    def key_of(self, code: str) -> Any:
        """One code in this set's form (``None`` when it cannot be a member): no arrays."""
        import numpy as np

        if not self.packed:
            return code.encode("utf-8") if self.array.dtype.kind == "S" else code
        data = code.encode("utf-8")
        if len(data) != self.width or not data.startswith(self.prefix) or not data.endswith(self.suffix):
            return None
        key = 0
        for byte in data[len(self.prefix): len(self.prefix) + self.middle]:
            rank = int(self.rank[byte])
            if rank < 0:
                return None
            key = (key << self.bits) | rank
        return np.uint64(key)

    def index_of(self, code: str) -> int | None:
        """Where ``code`` sits in :attr:`array`, or None when it is not a member."""
        if self.array.size == 0:
            return None
        key = self.key_of(code)
        if key is None:
            return None
        at = int(self.array.searchsorted(key))
        return at if at < self.array.size and self.array[at] == key else None

    def __contains__(self, code: object) -> bool:
        return isinstance(code, str) and self.index_of(code) is not None

    def __len__(self) -> int:
        return int(self.array.size)

    def codes(self, mask: Any = None) -> list[str]:
        """The codes (those where ``mask`` holds, if given) as text, in sorted order."""
        chosen = self.array if mask is None else self.array[mask]
        if self.packed:
            return self._unpack(chosen)
        if chosen.dtype.kind == "S":
            return [value.decode("utf-8") for value in chosen.tolist()]
        return [str(value) for value in chosen.tolist()]

    def with_keys(self, keys: Any) -> CodeSet:
        """A set like this one holding ``keys`` (already in its form, sorted, distinct)."""
        other = object.__new__(CodeSet)
        other.__dict__.update(self.__dict__)
        other.array = keys
        return other

    def like(self, codes: Any) -> CodeSet:
        """Another set of codes of the same series."""
        return CodeSet(codes, prefix=self.prefix.decode("utf-8"), suffix=self.suffix.decode("utf-8"), width=self.width,
                       symbols=self.symbols)

    def subset(self, codes: Iterable[str]) -> CodeSet:
        """The members of this set that are among ``codes``."""
        import numpy as np

        wanted = np.array(list(codes), dtype=str)
        if not wanted.size:
            return self.with_keys(self.array[:0])
        keys, fits = self._keys(wanted)
        return self.with_keys(np.unique(keys[fits & self.contains_keys(keys)]))


__all__ = ["CodeSet"]
