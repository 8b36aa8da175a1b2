"""Capture file readers: CSV, .npy, .npz; every bad input names the file and the row."""

import numpy as np
import pytest

from bringup.captures.files import read_capture
from bringup.errors import InputError


def write(tmp_path, name, text):
    path = tmp_path / name
    path.write_text(text, encoding="utf-8")
    return path


def test_csv_with_header_comments_and_blank_lines(tmp_path):
    path = write(
        tmp_path,
        "cap.csv",
        "# exported by a scope\n# 3 points\ntime,gate,switch\n\n0,0.1,24\n1e-9,5.5,12\n# mid\n2e-9,11.9,0.2\n",
    )
    cap = read_capture(path)
    assert cap.names == ["gate", "switch"]
    assert cap.t_s.tolist() == [0.0, 1e-9, 2e-9]
    name, y = cap.channel("switch")
    assert name == "switch" and y.tolist() == [24.0, 12.0, 0.2]
    assert cap.channel()[0] == "gate"
    t0, dt = cap.sampling()
    assert t0 == 0.0 and dt == pytest.approx(1e-9)


def test_csv_without_header_semicolons_and_decimal_commas(tmp_path):
    assert read_capture(write(tmp_path, "a.csv", "0;1\n1;2\n2;3\n")).names == ["ch1"]
    cap = read_capture(write(tmp_path, "b.csv", "t;v\n0,0;1,5\n0,5;2,5\n1,0;3,5\n"))
    assert cap.t_s.tolist() == [0.0, 0.5, 1.0]
    assert cap.channel("v")[1].tolist() == [1.5, 2.5, 3.5]


def test_csv_quoted_header_with_units_row_tabs_and_crlf(tmp_path):
    cap = read_capture(write(tmp_path, "q.csv", '"Time","CH1"\r\n"s","V"\r\n0,1\r\n1,2\r\n'))
    assert cap.names == ["CH1"]
    cap = read_capture(write(tmp_path, "t.tsv", "t\tv\n0\t1\n1\t2\n"))
    assert cap.channel()[1].tolist() == [1.0, 2.0]


@pytest.mark.parametrize(
    ("text", "fragment"),
    [
        ("t,v\n0,1\n1,2\n2,x\n", "line 4, column 2: not a number: 'x'"),
        ("# c\nt,v\n0,1\n# c\n1,2,3\n", "line 5: 3 columns, expected 2"),
        ("t,v\n0,1\n1,\n", "line 3, column 2: not a number: ''"),
        ("t,v\n0,1\n1,nan\n", "line 3: NaN or infinite value"),
        ("t,v\n0,1\n\n1,inf\n", "line 4: NaN or infinite value"),
        ("t,v\n0,1\n1,2\n1,3\n", "line 4: the time does not increase"),
        ("t,v\n0,1\n2,2\n1,3\n", "line 4: the time does not increase"),
        ("# nothing\n", "no data rows"),
        ("t,v\n", "no data rows"),
        ("t\n0\n1\n", "need a time column and at least one signal column"),
        ("a,b\nc,d\ne,f\n0,1\n", "line 3: non-numeric cell 'e'"),
        ("t,v,w\n0,1\n1,2\n", "the header names 3 columns but the data has 2"),
        ("t,v,v\n0,1,2\n1,2,3\n", "column name 'v' appears twice"),
        ("t,v\n0,1\n", "needs at least 2 samples"),
    ],
)
def test_bad_csv_names_the_file_and_line(tmp_path, text, fragment):
    path = write(tmp_path, "bad.csv", text)
    with pytest.raises(InputError) as info:
        read_capture(path)
    message = str(info.value)
    assert message.startswith(str(path))
    assert fragment in message
    assert "\n" not in message


def test_missing_empty_and_folder(tmp_path):
    for path, fragment in [
        (tmp_path / "nope.csv", "no such file"),
        (write(tmp_path, "empty.csv", ""), "the file is empty"),
        (tmp_path, "is a folder"),
    ]:
        with pytest.raises(InputError, match=fragment):
            read_capture(path)


def test_npy_and_npz(tmp_path):
    t = np.arange(5) * 1e-9
    np.save(tmp_path / "a.npy", np.column_stack([t, t * 2, t * 3]))
    cap = read_capture(tmp_path / "a.npy")
    assert cap.names == ["ch1", "ch2"] and cap.channel("ch2")[1].tolist() == (t * 3).tolist()
    np.savez(tmp_path / "b.npz", t=t, gate=np.ones(5, np.float32), vbs=np.zeros(5))
    cap = read_capture(tmp_path / "b.npz")
    assert cap.names == ["gate", "vbs"] and cap.channel("gate")[1].dtype == np.float32
    with pytest.raises(InputError, match="no channel 'vgs' \\(channels: gate, vbs\\)"):
        cap.channel("vgs")


@pytest.mark.parametrize(
    ("arrays", "fragment"),
    [
        ({"time": np.arange(3.0), "v": np.ones(3)}, "no array named 't'"),
        ({"t": np.arange(3.0)}, "no channel arrays"),
        ({"t": np.arange(3.0), "v": np.ones(4)}, "array 'v' has shape (4,)"),
        ({"t": np.array([0.0, 2.0, 1.0]), "v": np.ones(3)}, "sample 3: the time does not increase"),
        ({"t": np.arange(3.0), "v": np.array([1.0, np.nan, 2.0])}, "array 'v': sample 2: NaN"),
        ({"t": np.arange(3.0), "v": np.array(["a", "b", "c"])}, "not numbers"),
    ],
)
def test_bad_npz(tmp_path, arrays, fragment):
    np.savez(tmp_path / "bad.npz", **arrays)
    with pytest.raises(InputError) as info:
        read_capture(tmp_path / "bad.npz")
    assert fragment in str(info.value)


def test_bad_npy(tmp_path):
    np.save(tmp_path / "one.npy", np.arange(5.0))
    with pytest.raises(InputError, match="shape \\(N, 2\\)"):
        read_capture(tmp_path / "one.npy")
    (tmp_path / "junk.npy").write_bytes(b"not numpy at all")
    with pytest.raises(InputError, match="not a readable NumPy file"):
        read_capture(tmp_path / "junk.npy")


def test_uniform_sampling_check(tmp_path):
    # Times printed with few digits still read as uniform; a gap does not.
    t = np.round(np.arange(1000) * 1.234567e-9, 12)
    cap = read_capture(write(tmp_path, "u.csv", "".join(f"{a:.4e},1\n" for a in t)))
    assert cap.sampling()[1] == pytest.approx(1.234567e-9, rel=1e-4)
    gap = np.concatenate([np.arange(10.0), np.arange(12.0, 20.0)])
    np.savez(tmp_path / "g.npz", t=gap, v=np.ones(gap.size))
    with pytest.raises(InputError, match="sample 11: the time is not uniformly sampled"):
        read_capture(tmp_path / "g.npz").sampling()


def test_a_large_csv(tmp_path):
    # Read by numpy's C reader, not a Python loop per row (the benchmark is the place for speed).
    n = 300_000
    t = np.arange(n) * 1e-9
    data = np.column_stack([t, np.sin(t * 1e7)])
    np.savetxt(tmp_path / "big.csv", data, delimiter=",", fmt="%.9e", header="t,v", comments="")
    cap = read_capture(tmp_path / "big.csv")
    assert cap.t_s.size == n
    assert np.allclose(cap.channel("v")[1], data[:, 1], rtol=1e-8, atol=1e-12)


def test_a_float32_time_column_is_read_as_uniform(tmp_path):
    # 1 ns steps near 10 ms in float32 (the last millisecond of a 10 Mpt record from 0):
    # there float32 instants are 2**-30 s = 0.93 ns apart (IEEE 754 binary32, 24-bit
    # significand), so the stored steps are 0.93 or 1.86 ns. Each instant is still within
    # half of that spacing of the 1 ns grid.
    n = 1_000_000
    t = (9e-3 + np.arange(n, dtype=np.float64) * 1e-9).astype(np.float32)
    rng = np.random.default_rng(7)
    y = (rng.normal(0.0, 0.05, n) + (np.arange(n) // 5000 % 2) * 12.0).astype(np.float32)
    np.savez(tmp_path / "f32.npz", t=t, gate=y)
    cap = read_capture(tmp_path / "f32.npz")
    t0, dt = cap.sampling()
    assert t0 == pytest.approx(9e-3, abs=1e-9)
    assert dt == pytest.approx(1e-9, rel=1e-6)
    assert cap.t_s.dtype == np.float32  # read as stored, no float64 copy


def test_a_csv_time_printed_with_few_digits_is_read_as_uniform(tmp_path):
    # As bench scopes write it: 4 significant digits. At 1.2 ns over 24 us the printed
    # resolution is 1 ns (steps of 1 or 2 ns); at 0.8 ns over 16 us it is 1 ns, coarser than
    # the sample interval, so neighbouring instants print equal. Both are uniform records.
    rng = np.random.default_rng(3)
    for dt, n, fmt in [(1.2e-9, 20_000, "%.3e"), (0.8e-9, 20_000, "%.3e")]:
        t = np.arange(n) * dt + 1e-5
        v = np.round(rng.normal(5.0, 0.1, n) / 0.0625) * 0.0625  # noise, 8-bit-like steps
        path = tmp_path / f"few-{dt:g}.csv"
        np.savetxt(path, np.column_stack([t, v]), delimiter=",", fmt=[fmt, "%.4f"],
                   header="Time,CH1", comments="")  # fmt: skip
        cap = read_capture(path)
        t0, got = cap.sampling()
        assert t0 == pytest.approx(1e-5, abs=1e-9)
        assert got == pytest.approx(dt, rel=1e-3)  # span (n-1)*dt to +-1 ns


def test_non_uniform_files_are_still_refused(tmp_path):
    # One sample missing in the middle of a long record: the instants each side of it are
    # dt/2 off the grid through the ends; printed with ample digits.
    t = np.arange(100_001) * 1e-9
    t = np.delete(t, 50_000)
    path = tmp_path / "missing.csv"
    np.savetxt(path, np.column_stack([t, np.ones(t.size)]), delimiter=",", fmt="%.9e")
    with pytest.raises(InputError, match="line 50001: the time is not uniformly sampled"):
        read_capture(path).sampling()
    # A slow drift (a clock 5 % fast over the second half), no single step far off: refused.
    t = np.concatenate([np.arange(5000.0), 5000 + np.arange(5000.0) * 1.05]) * 1e-9
    np.savez(tmp_path / "drift.npz", t=t.astype(np.float32), v=np.ones(t.size))
    with pytest.raises(InputError, match="the time is not uniformly sampled"):
        read_capture(tmp_path / "drift.npz").sampling()
    # Equal instants in a file printed finely enough to tell them apart: refused.
    np.savez(tmp_path / "repeat.npz", t=np.array([0.0, 1e-9, 1e-9, 3e-9]), v=np.ones(4))
    with pytest.raises(InputError, match="sample 3: the time does not increase"):
        read_capture(tmp_path / "repeat.npz")
    # Equal instants printed so coarsely that the span does not give the interval either.
    with pytest.raises(InputError, match="line 3: the time does not increase"):
        read_capture(write(tmp_path, "coarse.csv", "0.0,1\n0.1,2\n0.1,3\n0.2,4\n"))
