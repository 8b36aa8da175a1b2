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
