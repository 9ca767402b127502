"""The CSV writer's text equals numpy.savetxt's with the same formats (the reference), only faster."""

import numpy as np

from seqgen.emit.writers import CSV_CHUNK, write_csv
from seqgen.model import DeviceTable


def _savetxt_reference(path, table):
    # the README's csv: tick, time_s, the value columns, then one code column per output ("<name> [code]")
    header = ",".join(["tick", "time_s"] + [f"{c} [{u}]" if u else c for c, u in zip(table.columns, table.units)]
                      + [f"{c} [code]" for c in table.columns])
    fmt = ["%d", "%.12g"] + ["%d" if k == "digital" else "%.10g" for k in table.kinds] + ["%d"] * len(table.columns)
    codes = np.zeros(table.values.shape) if table.codes is None else np.asarray(table.codes, dtype=np.float64)
    data = np.column_stack([table.ticks.astype(np.float64), table.ticks * table.tick_s, table.values, codes])
    with open(path, "w", encoding="utf-8", newline="\n") as fh:
        fh.write(header + "\n")
        np.savetxt(fh, data, fmt=fmt, delimiter=",")


def test_csv_matches_numpy_savetxt_across_chunk_boundaries(tmp_path):
    rng = np.random.default_rng(3)
    n = 2 * CSV_CHUNK + 17  # three chunks, the last one partial
    ticks = np.cumsum(rng.integers(1, 50, n)).astype(np.int64)
    values = np.column_stack([rng.normal(size=n) * 10.0 ** rng.integers(-9, 9, n), rng.integers(0, 2, n).astype(float),
                              np.full(n, -0.0), rng.uniform(-1e-300, 1e-300, n)])
    codes = np.column_stack([rng.integers(-2 ** 15, 2 ** 15, n), values[:, 1], rng.integers(0, 2 ** 32, n),
                             rng.integers(0, 2 ** 14, n)]).astype(np.int64)  # below 2^53: exact as floats too
    table = DeviceTable("dev", 1e-7, ticks, ("a", "gate", "b", "c"), values, ("V", "", "Hz", "rad"),
                        ("analog", "digital", "synth", "synth"), codes=codes)
    write_csv(tmp_path / "new.csv", table)
    _savetxt_reference(tmp_path / "ref.csv", table)
    assert (tmp_path / "new.csv").read_bytes() == (tmp_path / "ref.csv").read_bytes()


def test_csv_ticks_stay_exact_beyond_float_precision(tmp_path):
    # 2^53 + 1 is not a float64: the writer must print the integer itself
    ticks = np.array([0, 2 ** 53 + 1], dtype=np.int64)
    table = DeviceTable("dev", 1e-9, ticks, ("a",), np.zeros((2, 1)), ("V",), ("analog",))
    write_csv(tmp_path / "t.csv", table)
    assert (tmp_path / "t.csv").read_text().splitlines()[2].startswith(f"{2 ** 53 + 1},")
