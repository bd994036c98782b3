"""Writes the Parquet files the tests read, with a general-purpose tool
(pyarrow), so assort's Parquet reader is checked on files it did not write.

    python3 -m venv /tmp/pyenv
    /tmp/pyenv/bin/pip install -r tests/reference/parquet-requirements.txt
    /tmp/pyenv/bin/python tests/reference/parquet_fixtures.py

Writes, under tests/data/parquet/:
- wine.parquet: tests/data/wine.csv (outside data, see ATTRIBUTION.md),
  read by pyarrow's CSV reader, written with snappy compression;
- coop_members.parquet: the invented demo's members
  (recipes/data/coop_members.csv), blanks as nulls, the branch a
  dictionary-encoded string, zstd compression, row groups of 1,000;
- coop_members_parts/: the same members in four part files (snappy),
  with a `_SUCCESS` marker;
- coop_members_single.parquet: the same members with every share and
  ratio as a single-precision float (`float32`), as some extracts store
  them: read as the double their shortest text gives, as the CSV reads;
- types.parquet: one column of each type assort reads or refuses.
"""
import datetime
import decimal
import pathlib

import pyarrow as pa
import pyarrow.csv as pcsv
import pyarrow.parquet as pq

HERE = pathlib.Path(__file__).resolve().parent
ROOT = HERE.parent.parent
OUT = ROOT / "tests" / "data" / "parquet"
OUT.mkdir(parents=True, exist_ok=True)

wine = pcsv.read_csv(ROOT / "tests" / "data" / "wine.csv")
pq.write_table(wine, OUT / "wine.parquet", compression="snappy")

members = pcsv.read_csv(
    ROOT / "recipes" / "data" / "coop_members.csv",
    convert_options=pcsv.ConvertOptions(
        column_types={"member_id": pa.string(), "home_branch": pa.string()}
    ),
)
branch = members.column("home_branch").dictionary_encode()
members = members.set_column(
    members.schema.get_field_index("home_branch"), "home_branch", branch
)
pq.write_table(
    members, OUT / "coop_members.parquet", compression="zstd", row_group_size=1000
)
# The same members as a folder of four part files, as a partitioned
# extract arrives, with the marker file such writers leave.
parts = OUT / "coop_members_parts"
parts.mkdir(exist_ok=True)
quarter = members.num_rows // 4
for i in range(4):
    rows = members.slice(i * quarter, quarter if i < 3 else members.num_rows - 3 * quarter)
    pq.write_table(rows, parts / f"part-{i:05d}.parquet", compression="snappy")
(parts / "_SUCCESS").write_text("")
# Shares and ratios in single precision.
single = members
for name in ["visits_per_month", "share_fresh", "share_bulk", "share_prepared",
             "online_ratio", "coupon_rate"]:
    at = single.schema.get_field_index(name)
    single = single.set_column(at, name, single.column(name).cast(pa.float32()))
pq.write_table(single, OUT / "coop_members_single.parquet", compression="snappy")

types = pa.table(
    {
        "id": pa.array([9007199254740993, 2, 3], pa.uint64()),
        "small": pa.array([1, -2, None], pa.int8()),
        "ratio": pa.array([0.25, None, 1.5], pa.float32()),
        "price": pa.array(
            [decimal.Decimal("12.34"), decimal.Decimal("0.10"), None],
            pa.decimal128(9, 2),
        ),
        "member": pa.array([True, False, None], pa.bool_()),
        "band": pa.array(["gold", "", None], pa.string()),
        "joined": pa.array(
            [datetime.date(2024, 1, 2), datetime.date(2025, 3, 4), None], pa.date32()
        ),
        "seen": pa.array(
            [datetime.datetime(2026, 1, 1, 12, 0), None, None], pa.timestamp("ms")
        ),
        "tags": pa.array([["a"], [], None], pa.list_(pa.string())),
    }
)
pq.write_table(types, OUT / "types.parquet", compression="gzip")
print("pyarrow", pa.__version__, "wrote", sorted(p.name for p in OUT.iterdir()))
