"""PostgreSQL's binary COPY format, written from numpy arrays without a Python loop per row.

A result table of a large run holds a row per lane and period; writing it as
text means a Python string per figure and a decimal parse per figure on the
server. Here every column becomes a block of fixed-width big-endian fields
(``bigint``, ``integer``, ``numeric`` or fixed-width ``text``) built by numpy, the blocks are laid
side by side into one byte matrix, and NULL fields drop their payload through
a byte mask. The layout is the one PostgreSQL documents for ``COPY ... (FORMAT
binary)``: a signature and two 32-bit words, then per row a 16-bit field count
and per field a 32-bit length (-1 for NULL) and the value in the type's own
send format, then a 16-bit -1.

A ``numeric`` value is sent as ``ndigits, weight, sign, dscale`` (16 bits
each) and ``ndigits`` base-10000 digits, most significant first. Scaled
integers (``value * 10**-decimals``) are written with a fixed six digits:
enough for any 64-bit integer shifted by up to three decimal places to reach
a multiple of four. PostgreSQL strips the leading and trailing zero digits on
receipt, so the stored value is the same as from the text literal
``{value}e-{decimals}``, display scale included.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

SIGNATURE = b"PGCOPY\n\xff\r\n\x00" + bytes(8)  # signature, flags 0, header extension 0
TRAILER = b"\xff\xff"
NUMERIC_DIGITS = 6
_BASE = 10_000
_POSITIVE, _NEGATIVE = 0x0000, 0x4000
# Rows per block handed to the server: bounds the byte matrix of a large horizon.
BLOCK_ROWS = 250_000


@dataclass(frozen=True)
class Column:
    """One column of a binary COPY.

    Parameters
    ----------
    kind : {"int8", "int4", "numeric", "text"}
    values : array of int, or of bytes for ``text``
        For ``numeric``, scaled integers: the value is ``values * 10**-decimals``.
        For ``text``, a fixed-width bytes array (numpy ``S<n>``) of UTF-8
        strings that all have that width (period codes, for example).
    decimals : int
        ``numeric`` only: decimal places of the scaled integers (0 to 12).
    present : bool array, optional
        False where the field is NULL; every field is present by default.
    """

    kind: str
    values: np.ndarray
    decimals: int = 0
    present: np.ndarray | None = None

    def __post_init__(self):
        if self.kind not in ("int8", "int4", "numeric", "text"):
            raise ValueError(f"unknown column kind {self.kind!r}")
        if self.kind == "text":
            values = np.asarray(self.values)
            if values.dtype.kind != "S" or (values.size and (np.char.str_len(values) != values.itemsize).any()):
                raise ValueError("text values must be bytes of one width")
        if self.kind == "numeric" and not 0 <= self.decimals <= 12:
            raise ValueError("numeric decimals must be between 0 and 12")

    @property
    def payload(self) -> int:
        """Bytes of one value."""
        if self.kind == "text":
            return np.asarray(self.values).itemsize
        return {"int8": 8, "int4": 4, "numeric": 8 + 2 * NUMERIC_DIGITS}[self.kind]


def numeric_digits(values: np.ndarray, decimals: int) -> tuple[np.ndarray, int, np.ndarray]:
    """Base-10000 digits of ``values * 10**-decimals``: ``(digits, weight, sign)``.

    ``digits`` is ``(rows, 6)``, most significant first; ``weight`` is the
    power of 10000 of the first digit; ``sign`` is the numeric sign word per row.

    Examples
    --------
    >>> digits, weight, sign = numeric_digits(np.array([123456, -5]), 4)
    >>> digits.tolist(), weight, sign.tolist()
    ([[0, 0, 0, 0, 12, 3456], [0, 0, 0, 0, 0, 5]], 4, [0, 16384])
    """
    v = np.asarray(values, dtype=np.int64)
    # |v| as unsigned: abs(-2**63) wraps to -2**63, whose unsigned view is 2**63.
    magnitude = np.abs(v).view(np.uint64)
    fraction_groups = -(-decimals // 4)
    shift = np.uint64(10 ** (4 * fraction_groups - decimals))
    base = np.uint64(_BASE)
    digits = np.empty((v.shape[0], NUMERIC_DIGITS), dtype=np.int64)
    carry = np.zeros(v.shape[0], dtype=np.uint64)
    rest = magnitude
    # Groups of |v| from the least significant, each times the shift, with carry.
    for j in range(NUMERIC_DIGITS):
        group = rest % base
        rest = rest // base
        t = group * shift + carry  # < 10**4 * 10**3 + 10**3: no wrap
        digits[:, NUMERIC_DIGITS - 1 - j] = (t % base).astype(np.int64)
        carry = t // base
    if (rest | carry).any():  # pragma: no cover - six digits hold any int64
        raise OverflowError("value does not fit six base-10000 digits")
    sign = np.where(v < 0, _NEGATIVE, _POSITIVE).astype(np.int64)
    return digits, NUMERIC_DIGITS - 1 - fraction_groups, sign


def _field_bytes(column: Column, rows: slice) -> np.ndarray:
    """``(rows, 4 + payload)`` bytes of one column's fields, length words included."""
    values = np.asarray(column.values)[rows]
    n = values.shape[0]
    if column.kind == "numeric":
        dtype = np.dtype(
            [("len", ">i4"), ("ndigits", ">i2"), ("weight", ">i2"), ("sign", ">u2"),
             ("dscale", ">i2"), ("digits", ">i2", (NUMERIC_DIGITS,))]
        )
        out = np.zeros(n, dtype=dtype)
        digits, weight, sign = numeric_digits(values, column.decimals)
        out["ndigits"] = NUMERIC_DIGITS
        out["weight"] = weight
        out["sign"] = sign
        out["dscale"] = column.decimals
        out["digits"] = digits
    elif column.kind == "text":
        dtype = np.dtype([("len", ">i4"), ("value", values.dtype)])
        out = np.zeros(n, dtype=dtype)
        out["value"] = values
    else:
        if column.kind == "int4" and n and (values.min() < -(2**31) or values.max() >= 2**31):
            raise ValueError("a value does not fit a 32-bit integer column")
        dtype = np.dtype([("len", ">i4"), ("value", ">i8" if column.kind == "int8" else ">i4")])
        out = np.zeros(n, dtype=dtype)
        out["value"] = values
    out["len"] = column.payload
    if column.present is not None:
        out["len"] = np.where(np.asarray(column.present)[rows], column.payload, -1)
    return out.view(np.uint8).reshape(n, dtype.itemsize)


def encode_rows(columns: list[Column], rows: slice = slice(None)) -> bytes:
    """The binary COPY rows (no signature, no trailer) of ``columns[rows]``.

    Examples
    --------
    >>> encode_rows([Column("int4", np.array([7]))]).hex()
    '00010000000400000007'
    """
    blocks = [_field_bytes(c, rows) for c in columns]
    n = blocks[0].shape[0] if blocks else 0
    count = np.full(n, len(columns), dtype=">i2").view(np.uint8).reshape(n, 2)
    matrix = np.hstack([count, *blocks])
    nulls = [None if c.present is None else ~np.asarray(c.present)[rows] for c in columns]
    if not any(null is not None and null.any() for null in nulls):
        return matrix.tobytes()
    keep = np.ones(matrix.shape, dtype=bool)
    offset = 2
    for null, block in zip(nulls, blocks):
        if null is not None:
            keep[np.ix_(null, np.arange(offset + 4, offset + block.shape[1]))] = False
        offset += block.shape[1]
    return matrix[keep].tobytes()


def copy_binary(cursor, table: str, names: list[str], columns: list[Column]) -> None:
    """``COPY table (names) FROM STDIN (FORMAT binary)`` of ``columns`` on a psycopg cursor."""
    if len(names) != len(columns):
        raise ValueError("one name per column")
    n = np.asarray(columns[0].values).shape[0]
    if n == 0:
        return
    with cursor.copy(f"COPY {table} ({', '.join(names)}) FROM STDIN (FORMAT binary)") as copy:
        copy.write(SIGNATURE)
        for start in range(0, n, BLOCK_ROWS):
            copy.write(encode_rows(columns, slice(start, start + BLOCK_ROWS)))
        copy.write(TRAILER)
