"""``frame_csv`` must give exactly the text of pandas' ``DataFrame.to_csv(index=False, lineterminator="\\n")``."""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from sleepfuse.output.csvtext import frame_csv

ROOT = Path(__file__).resolve().parents[1]


def pandas_csv(df: pd.DataFrame) -> str:
    return df.to_csv(index=False, lineterminator="\n")


def test_every_output_table_of_the_sample_study(tmp_path):
    # Reference: pandas DataFrame.to_csv on the very tables batch writes.
    from sleepfuse.run.batch import BatchOptions, run_batch

    result = run_batch(ROOT / "sample_records", BatchOptions(out=tmp_path / "out", cache=False), argv=["test"])
    for name, table in result.tables.items():
        assert frame_csv(table) == pandas_csv(table), name
        assert (tmp_path / "out" / f"{name}.csv").read_text(encoding="utf-8") == pandas_csv(table), name


floats = st.one_of(
    st.floats(allow_nan=True, allow_infinity=True),
    st.sampled_from([0.0, -0.0, 1e16, 1e-5, 1e-4, 123456789012345678.0, 0.1 + 0.2, 5e-324, 1.7976931348623157e308]),
)
texts = st.one_of(st.none(), st.just(float("nan")),
                  st.text(alphabet=st.sampled_from(list('ab ,;"\'\n\r\t\\é∞x0-')), max_size=8))


@settings(max_examples=200, deadline=None)
@given(data=st.data(), n=st.integers(0, 12))
def test_generated_frames(data, n):
    df = pd.DataFrame({
        "f": data.draw(st.lists(floats, min_size=n, max_size=n)),
        "t": pd.Series(data.draw(st.lists(texts, min_size=n, max_size=n)), dtype=object),
        "b": data.draw(st.lists(st.booleans(), min_size=n, max_size=n)),
        "i": np.array(data.draw(st.lists(st.integers(-2**62, 2**62), min_size=n, max_size=n)), dtype=np.int64),
        "s": pd.Series(data.draw(st.lists(st.one_of(st.none(), st.text(max_size=5)), min_size=n, max_size=n)),
                       dtype="str"),
        'odd "name", here': data.draw(st.lists(floats, min_size=n, max_size=n)),
    })
    assert frame_csv(df) == pandas_csv(df)


def test_blocks_of_rows_join_to_the_same_text():
    from sleepfuse.output.csvtext import csv_chunks

    rng = np.random.default_rng(2)
    df = pd.DataFrame({"a": rng.normal(size=1000), "b": rng.choice(["x", "y,z", ""], size=1000),
                       "c": rng.integers(0, 9, 1000), "d": rng.random(1000) < 0.5})
    for rows in (1, 7, 999, 1000, 4096):
        chunks = list(csv_chunks(df, rows=rows))
        assert len(chunks) == 1 + -(-len(df) // rows)
        assert "".join(chunks) == pandas_csv(df)


@pytest.mark.parametrize("df", [
    pd.DataFrame(),
    pd.DataFrame(columns=["a", "b"]),
    pd.DataFrame({"d": pd.to_datetime(["2026-03-01", None])}),  # dates: pandas itself
    pd.DataFrame({"c": pd.Categorical(["x", None])}),
    pd.DataFrame({"n": pd.array([1, None], dtype="Int64")}),
    pd.DataFrame({"f32": np.array([0.1, math.nan], dtype=np.float32)}),
    pd.DataFrame([[1, 2]], columns=["a", "a"]),  # repeated names
    pd.DataFrame({1: [1.5], "x": [2.5]}),  # a non-text name
    pd.DataFrame({"o": [1.5, 2, True, None, "x"]}),  # mixed objects
    pd.DataFrame({"o": pd.Series([np.float64(1.5), np.float32(2.5), np.int64(3), np.True_, 0.1 + 0.2], dtype=object),
                  "t": ["", " lead", "trail ", 'q"', "a,b"]}),  # numpy scalars as objects, fields to quote
    pd.DataFrame({"only": ["", "x", "a,b"]}),  # one column: a lone empty field is quoted
    pd.DataFrame({"a": ["", ""], "b": ["", ""]}),  # rows of empty fields
])
def test_other_frames_fall_back_or_agree(df):
    assert frame_csv(df) == pandas_csv(df)
