"""Binary COPY writer and packed column reader against PostgreSQL's own parsers.

The reference for every NUMERIC written in binary is the server's text input
of the exact literal ``{value}e-{decimals}`` (PostgreSQL's ``numeric_in``),
compared on the value and on its text form, so the display scale matches too;
and Python's :class:`decimal.Decimal` for the value itself.
"""

from __future__ import annotations

from decimal import Decimal

import numpy as np
import pytest
import sqlalchemy as sa

from planner.database import pgbinary
from planner.database.pgbinary import Column, copy_binary, numeric_digits
from planner.database.snapshot import fetch_columns
from planner.errors import PlannerError

INT64_EDGES = [0, 1, -1, 9_999, 10_000, -10_000, 99_999_999, 2**63 - 1, -(2**63), -(2**63) + 1, 10**18]


def _values(rng: np.random.Generator, n: int) -> np.ndarray:
    return np.concatenate(
        [
            np.array(INT64_EDGES, dtype=np.int64),
            rng.integers(-(2**63), 2**63 - 1, n, dtype=np.int64, endpoint=True),
            rng.integers(-100_000, 100_000, n, dtype=np.int64),
        ]
    )


def test_numeric_digits_of_a_few_values_by_hand():
    # 12.3456 = 12 * 10000**0 + 3456 * 10000**-1; 0.05 = 500 * 10000**-1.
    digits, weight, sign = numeric_digits(np.array([123456, 5, -5]), 4)
    assert weight == 4
    assert digits[:, -2:].tolist() == [[12, 3456], [0, 5], [0, 5]]
    digits, weight, _ = numeric_digits(np.array([5]), 2)
    assert (weight, digits[0, -1]) == (4, 500)
    assert sign.tolist() == [0, 0, 0x4000]


@pytest.mark.parametrize("decimals", range(13))
def test_binary_numeric_equals_the_servers_parse_of_the_text_literal(engine, decimals, monkeypatch):
    # Small blocks, so that a COPY spans several of them.
    monkeypatch.setattr(pgbinary, "BLOCK_ROWS", 97)
    rng = np.random.default_rng(decimals)
    values = _values(rng, 300)
    present = rng.random(values.shape[0]) > 0.25
    present[:3] = True
    ids = np.arange(values.shape[0], dtype=np.int64)
    with engine.begin() as conn:
        conn.execute(sa.text("CREATE TEMP TABLE b (i bigint, k integer, x numeric, y numeric)"))
        with conn.connection.driver_connection.cursor() as cur:
            copy_binary(
                cur, "b", ["i", "k", "x", "y"],
                [
                    Column("int8", ids),
                    Column("int4", (ids % 7).astype(np.int64) - 3),
                    Column("numeric", values, decimals),
                    Column("numeric", values, decimals, present=present),
                ],
            )
        rows = conn.execute(
            sa.text(
                "SELECT i, k, x::text, y::text, x::text = (x_lit)::numeric::text, "
                "y IS NOT DISTINCT FROM y_lit::numeric "
                "FROM b JOIN unnest(CAST(:ids AS bigint[]), CAST(:lits AS text[]), CAST(:ylits AS text[])) "
                "AS t(i, x_lit, y_lit) USING (i) ORDER BY i"
            ),
            {
                "ids": ids.tolist(),
                "lits": [f"{v}e-{decimals}" for v in values.tolist()],
                "ylits": [f"{v}e-{decimals}" if p else None for v, p in zip(values.tolist(), present.tolist())],
            },
        ).all()
    assert len(rows) == values.shape[0]
    for (i, k, x, y, same_text, same_y), v, p in zip(rows, values.tolist(), present.tolist()):
        assert k == i % 7 - 3
        assert same_text and same_y, (v, decimals, x, y)
        assert Decimal(x) == Decimal(v).scaleb(-decimals)
        assert (y is None) == (not p)


def test_nothing_to_copy_sends_nothing(engine):
    with engine.begin() as conn:
        conn.execute(sa.text("CREATE TEMP TABLE e (i bigint)"))
        with conn.connection.driver_connection.cursor() as cur:
            copy_binary(cur, "e", ["i"], [Column("int8", np.empty(0, dtype=np.int64))])
        assert conn.execute(sa.text("SELECT count(*) FROM e")).scalar_one() == 0


def test_binary_text_equals_the_text_copied_with_nulls(engine):
    codes = np.array([b"2026-W08", b"2027-W01", b"2026-W53"])
    with engine.begin() as conn:
        conn.execute(sa.text("CREATE TEMP TABLE t (i int4, code text)"))
        with conn.connection.driver_connection.cursor() as cur:
            copy_binary(cur, "t", ["i", "code"], [
                Column("int4", np.arange(3)), Column("text", codes, present=np.array([True, False, True])),
            ])
        rows = conn.execute(sa.text("SELECT i, code FROM t ORDER BY i")).all()
    assert rows == [(0, "2026-W08"), (1, None), (2, "2026-W53")]


def test_column_rejects_unknown_kinds_and_decimals():
    with pytest.raises(ValueError):
        Column("float8", np.zeros(1))
    with pytest.raises(ValueError):
        Column("numeric", np.zeros(1, dtype=np.int64), decimals=13)
    # Text fields are one width (a shorter one would be sent with padding bytes).
    with pytest.raises(ValueError, match="one width"):
        Column("text", np.array([b"2026-W08", b"W1"]))
    # An id past 32 bits must not wrap around silently.
    with pytest.raises(ValueError, match="32-bit"):
        pgbinary.encode_rows([Column("int4", np.array([2**31]))])


def test_fetch_columns_returns_aligned_integer_and_text_columns(engine):
    texts = ["plain", "tab\there", "new\nline", 'quote " and \\ backslash', "", "Ünïcødé ✓"]
    ints = [INT64_EDGES[i % len(INT64_EDGES)] for i in range(len(texts))]
    with engine.begin() as conn:
        conn.execute(sa.text("CREATE TEMP TABLE f (id integer, v bigint, label text)"))
        # Inserted out of id order: the result comes back sorted on id.
        order = [3, 0, 5, 1, 4, 2]
        conn.execute(
            sa.text("INSERT INTO f VALUES (:id, :v, :label)"),
            [{"id": i, "v": ints[i], "label": texts[i]} for i in order],
        )
        got = fetch_columns(
            conn, "SELECT id, v, label FROM f", {}, ints=["id", "v"], texts=["label"], order_by="id"
        )
        assert got["id"].tolist() == list(range(len(texts)))
        assert got["v"].dtype == np.int64 and got["v"].tolist() == ints
        assert got["label"].tolist() == texts
        empty = fetch_columns(conn, "SELECT id, label FROM f WHERE false", {}, ints=["id"], texts=["label"])
        assert empty["id"].shape == (0,) and empty["label"].shape == (0,)
        with pytest.raises(PlannerError, match="NULL"):
            fetch_columns(conn, "SELECT NULLIF(id, 2) AS id FROM f", {}, ints=["id"])
