"""Bad input to ``bringup analyze`` and ``bringup calc``: one line, exit status 2, no traceback.

Each case runs ``python -m bringup`` in a subprocess on files written to ``tmp_path`` and checks
the project's rule for bad input: exactly one line on stderr naming the file (and line, row or
array) or the option as typed, exit status 2, nothing on stdout, no Python traceback and no
numpy warning.
"""

import json
import subprocess
import sys

import numpy as np
import pytest


def bringup(*argv):
    return subprocess.run(
        [sys.executable, "-m", "bringup", *map(str, argv)],
        capture_output=True,
        text=True,
        timeout=120,
    )


def refused(*argv) -> str:
    """Run, assert the bad-input rule, return the one stderr line."""
    proc = bringup(*argv)
    assert proc.returncode == 2, (proc.returncode, proc.stdout, proc.stderr)
    assert "Traceback" not in proc.stderr and "Warning" not in proc.stderr, proc.stderr
    lines = proc.stderr.strip().splitlines()
    assert len(lines) == 1, proc.stderr
    assert proc.stdout == "", proc.stdout
    assert lines[0].startswith("bringup: error: ")
    return lines[0]


def scope_pwm(n=4000, dt=1e-8, period=4e-6, duty=0.3, high=12.0, seed=0):
    """A PWM gate waveform as a scope records it: RC edges, ringing, noise, 8-bit codes."""
    rng = np.random.default_rng(seed)
    t = np.arange(n) * dt
    ph = np.mod(t, period)
    on = duty * period
    tau = 30e-9
    y = np.where(ph < on, high * (1 - np.exp(-ph / tau)), high * np.exp(-(ph - on) / tau))
    y = y + 0.3 * np.exp(-ph / 100e-9) * np.sin(2 * np.pi * ph / 50e-9)  # ringing after the edge
    y = y + rng.normal(0, 0.05, n)
    lsb = 16.0 / 256  # 8-bit over -2..14 V
    return t, -2.0 + np.clip(np.round((y + 2.0) / lsb), 0, 255) * lsb


# --- Finding 1-4: NumPy files ---------------------------------------------------------------


def test_npz_with_an_object_array(tmp_path):
    t, y = scope_pwm()
    path = tmp_path / "obj.npz"
    np.savez(path, t=t, gate=np.array(list(y), dtype=object))
    line = refused("analyze", "edges", path)
    assert "obj.npz: array 'gate'" in line and "object" in line


@pytest.mark.parametrize("cut", [20, 300, -30])
def test_truncated_npz(tmp_path, cut):
    t, y = scope_pwm()
    good = tmp_path / "good.npz"
    np.savez(good, t=t, gate=y)
    data = good.read_bytes()
    path = tmp_path / "cut.npz"
    path.write_bytes(data[:cut])
    line = refused("analyze", "edges", path)
    assert "cut.npz: not a readable NumPy file" in line and "archive" in line


def test_text_named_npz(tmp_path):
    path = tmp_path / "text.npz"
    path.write_text("t,v\n0,1\n1,2\n")
    line = refused("analyze", "edges", path)
    assert "text.npz: not a readable NumPy file (not an .npz archive" in line


def test_npy_data_named_npz(tmp_path):
    t, y = scope_pwm()
    path = tmp_path / "single.npz"
    with path.open("wb") as f:
        np.save(f, np.column_stack([t, y]))
    line = refused("analyze", "edges", path)
    assert "single.npz: is a .npy file" in line and "rename it to .npy" in line


def test_npz_data_named_npy(tmp_path):
    t, y = scope_pwm()
    path = tmp_path / "archive.npy"
    with path.open("wb") as f:
        np.savez(f, t=t, gate=y)
    line = refused("analyze", "edges", path)
    assert "archive.npy: is an .npz archive" in line and "rename it to .npz" in line


def test_npy_with_an_object_array(tmp_path):
    path = tmp_path / "obj.npy"
    np.save(path, np.array([[0.0, 1.0], [1.0, "x"]], dtype=object), allow_pickle=True)
    line = refused("analyze", "edges", path)
    assert "obj.npy" in line and "object" in line


def test_npy_with_a_damaged_header(tmp_path):
    t, y = scope_pwm()
    path = tmp_path / "damaged.npy"
    np.save(path, np.column_stack([t, y]))
    data = bytearray(path.read_bytes())
    data[data.index(b"}")] = ord(" ")  # the header's dict never closes
    path.write_bytes(bytes(data))
    line = refused("analyze", "edges", path)
    assert "damaged.npy: not a readable NumPy file (its header is damaged)" in line


# --- Finding 5: huge values --------------------------------------------------------------------


def _csv(path, t, y, header="time,gate\n"):
    with path.open("w") as f:
        f.write(header)
        np.savetxt(f, np.column_stack([t, y]), delimiter=",", fmt="%.9g")
    return path


def test_huge_values_are_overrange_for_edges(tmp_path):
    t, y = scope_pwm()
    big = y * 1e306
    path = _csv(tmp_path / "huge.csv", t, big)
    line = refused("analyze", "edges", path)
    # The first sample at or above 9.9E37; line 2 holds sample 0 (line 1 is the header).
    first = int(np.flatnonzero(np.abs(big) >= 9.9e37)[0])
    assert f"huge.csv: line {first + 2}, column 2: overrange value {big[first]:.6g}" in line
    assert "9.9E37" in line


def test_huge_values_are_overrange_for_droop(tmp_path):
    t, y = scope_pwm()
    y = y.copy()
    y[100:] *= 1e307
    path = _csv(tmp_path / "huge.csv", t, y)
    line = refused("analyze", "droop", path, "--floor", "8.2V")
    assert "huge.csv: line 102, column 2: overrange" in line


def test_overrange_in_an_npz_names_the_array_and_sample(tmp_path):
    t, y = scope_pwm()
    y = y.copy()
    y[7] = 9.9e37  # exactly the SCPI +INF value
    path = tmp_path / "c.npz"
    np.savez(path, t=t, gate=y)
    line = refused("analyze", "edges", path)
    assert "c.npz: array 'gate': sample 8: overrange value 9.9e+37" in line


def _soak_log(n=120, dt=15.0, seed=3):
    rng = np.random.default_rng(seed)
    t = np.arange(n) * dt
    temp = 80.0 - 55.0 * np.exp(-t / 300.0) + rng.normal(0, 0.05, n)
    return t, np.round(temp / 0.0625) * 0.0625  # a 1/16 K sensor


@pytest.mark.parametrize(
    ("scale_t", "scale_temp", "fragment"), [(1.0, 1e300, "column 2"), (1e300, 1.0, "column 1")]
)
def test_huge_soak_values_are_overrange(tmp_path, scale_t, scale_temp, fragment):
    t, temp = _soak_log()
    path = _csv(tmp_path / "soak.csv", (t + 1.0) * scale_t, temp * scale_temp, "t,T\n")
    line = refused("analyze", "soak", path)
    assert f"soak.csv: line 2, {fragment}: overrange" in line


def test_soak_below_absolute_zero(tmp_path):
    t, temp = _soak_log()
    temp = temp.copy()
    temp[4] = -300.0
    path = _csv(tmp_path / "soak.csv", t, temp, "t,T\n")
    line = refused("analyze", "soak", path)
    assert "soak.csv: line 6: channel T: -300 °C is below absolute zero" in line


def test_the_numeric_guard_refuses_an_overflow_in_one_line():
    # The guard the analyses run under: an overflow that slips past the overrange check
    # becomes one InputError, not a numpy RuntimeWarning and an infinite result.
    from bringup.commands.analyze import numeric_guard
    from bringup.errors import InputError

    big = np.array([1e200, 2e200])
    with pytest.raises(InputError, match=r"^x.csv: channel v: values too large to measure"):
        with numeric_guard("x.csv: channel v"):
            float(np.dot(big, big))
    with pytest.raises(InputError, match="cannot measure this record"):
        with numeric_guard("x.csv: channel v"):
            np.array([0.0]) / np.array([0.0])
    with numeric_guard("x.csv: channel v"):  # underflow to 0 is harmless
        assert float(np.exp(np.array([-1000.0]))[0]) == 0.0


# --- Finding 7: the --band unit -------------------------------------------------------------


def test_band_in_volts_reports_the_kelvin_error(tmp_path):
    t, temp = _soak_log()
    path = _csv(tmp_path / "soak.csv", t, temp, "t,T\n")
    line = refused("analyze", "soak", path, "--band", "5 V")
    assert "--band: cannot read '5 V' as a quantity in K" in line and "°C" not in line
    # A band written in degC is still a temperature difference (same number of K).
    ok = bringup("analyze", "soak", path, "--band", "0.5 degC", "--json")
    assert ok.returncode == 0, ok.stderr
    assert json.loads(ok.stdout)["band_k"] == 0.5


# --- Finding 8: negative values as a separate argument -----------------------------------------

BOOT = ["calc", "bootstrap", "--qg", "40n", "--iq", "150u", "--ileak", "1u"]


@pytest.mark.parametrize(
    ("argv", "fragment"),
    [
        ([*BOOT, "--ton-max", "38u", "--dv", "-1V"], "--dv: must be > 0, got '-1V'"),
        ([*BOOT, "--ton-max", "-38us", "--dv", "1V"], "--ton-max: must be > 0, got '-38us'"),
        ([*BOOT, "--ton-max", "38u", "--dv", "1", "--c", "-.1u"], "--c: must be > 0"),
        (["calc", "losses", "--iload", "-2 A", "--rdson", "1", "--duty", "1"], "--iload"),
    ],
)
def test_negative_values_reach_the_value_check(argv, fragment):
    assert fragment in refused(*argv)


def test_negative_settle_reaches_the_value_check(tmp_path):
    t, y = scope_pwm()
    path = _csv(tmp_path / "c.csv", t, y)
    assert "--settle: must be >= 0, got '-1us'" in refused(
        "analyze", "droop", path, "--floor", "8.2V", "--settle", "-1us"
    )


# --- Finding 9: CSV layout ------------------------------------------------------------------


def test_a_trailing_comma_on_every_row_is_read(tmp_path):
    t, y = scope_pwm()
    plain = _csv(tmp_path / "plain.csv", t, y)
    trailing = tmp_path / "trailing.csv"
    trailing.write_text("".join(line + ",\n" for line in plain.read_text().splitlines()))
    runs = [bringup("analyze", "edges", p, "--json") for p in (plain, trailing)]
    for proc in runs:
        assert proc.returncode == 0, proc.stderr
        assert proc.stderr == ""
    a, b = (json.loads(proc.stdout) for proc in runs)
    assert b["channel"] == "gate"  # the header's trailing comma is not a column either
    # The same numbers either way; the duty cycle is the 30 % the waveform was made with.
    assert b["duty_cycle"] == a["duty_cycle"] == pytest.approx(0.3, abs=0.02)
    assert b["rise_time_s"] == a["rise_time_s"]


def test_an_unnamed_last_column_is_still_a_column(tmp_path):
    t, y = scope_pwm()
    path = tmp_path / "unnamed.csv"
    with path.open("w") as f:
        f.write("time,gate,\n")  # the third column has no name: it is ch2, not a trailing comma
        np.savetxt(f, np.column_stack([t, y, -y]), delimiter=",", fmt="%.9g")
    proc = bringup("analyze", "edges", path, "--channel", "ch2", "--json")
    assert proc.returncode == 0, proc.stderr
    assert json.loads(proc.stdout)["channel"] == "ch2"


def test_a_trailing_comma_file_with_a_ragged_row_names_the_line(tmp_path):
    path = tmp_path / "ragged.csv"
    path.write_text("t,v,\n0,0,\n1,1,\n2,0,5,\n3,1,\n")
    assert "ragged.csv: line 4: 3 columns, expected 2" in refused("analyze", "edges", path)


def test_trailing_comma_with_decimal_commas(tmp_path):
    t, y = scope_pwm()
    rows = "".join(f"{a:.9g};{b:.6g};\n".replace(".", ",") for a, b in zip(t, y, strict=True))
    path = tmp_path / "de.csv"
    path.write_text("Zeit;gate;\n" + rows)
    proc = bringup("analyze", "edges", path, "--json")
    assert proc.returncode == 0, proc.stderr
    assert json.loads(proc.stdout)["duty_cycle"] == pytest.approx(0.3, abs=0.02)


@pytest.mark.parametrize(
    ("text", "fragment"),
    [
        ("0x0,0\n0x1,1\n2,0\n3,1\n", "line 1, column 1: hexadecimal number '0x0'"),
        ("t,v\n0,0x0\n1,0x1\n", "line 2, column 2: hexadecimal number '0x0'"),
        ("t,v\n0,0\n1,1\n2,0x1F\n", "line 4, column 2: hexadecimal number '0x1F'"),
    ],
)
def test_hex_numbers_are_named_by_line(tmp_path, text, fragment):
    path = tmp_path / "hex.csv"
    path.write_text(text)
    assert f"hex.csv: {fragment}" in refused("analyze", "edges", path)


def test_one_data_row_names_the_line_and_the_header(tmp_path):
    path = tmp_path / "one.csv"
    path.write_text("time,gate\ns,V\n0,1\n")
    line = refused("analyze", "edges", path)
    assert "one.csv: line 3: needs at least 2 samples, got 1" in line
    assert "lines 1 and 2 read as the header" in line


# --- Finding 6 and 10: calc -----------------------------------------------------------------


@pytest.mark.parametrize(
    ("argv", "fragments"),
    [
        (
            ["bootstrap", "--qg", "1e300C", "--iq", "1e300A", "--ileak", "0"]
            + ["--ton-max", "1e300s", "--dv", "1e-300V"],
            ["values too large to compute", "--qg", "--iq"],
        ),
        (
            ["bootstrap", "--qg", "1e300C", "--iq", "0", "--ileak", "0"]
            + ["--ton-max", "1s", "--dv", "1e-300V"],
            ["values too large to compute", "C_min", "--dv"],
        ),
        (
            ["gate", "--vdrv", "4V", "--vpl", "4.6V", "--qgd", "10n"]
            + ["--r-source", "2", "--r-sink", "2"],
            ["--vpl 4.6 V must be below --vdrv 4 V"],
        ),
        (
            ["gate", "--vdrv", "12V", "--vpl", "4.6V", "--qgd", "10n"]
            + ["--r-source", "0", "--r-sink", "0", "--rg", "0"],
            ["--r-source + --rg + --rg-int", "> 0"],
        ),
        (
            [*BOOT[1:], "--ton-max", "38u", "--duty-max", "95%", "--fsw", "25k", "--dv", "1"],
            ["--ton-max", "--duty-max", "not both"],
        ),
        (
            [*BOOT[1:], "--duty-max", "0", "--fsw", "25k", "--dv", "1"],
            ["--duty-max: must be > 0"],
        ),
        (
            [*BOOT[1:], "--ton-max", "38u", "--dv", "1", "--margin", "2V"],
            ["--margin: a factor has no unit, got '2V'"],
        ),
        (
            ["losses", "--tamb=-300degC", "--iload", "1", "--rdson", "1", "--duty", "1"],
            ["--tamb: below absolute zero", "'-300degC'"],
        ),
        (
            ["gate", "--r-pullup", "1e300ohm", "--c-gate", "1e300F"],
            ["values too large to compute", "--r-pullup", "--c-gate"],
        ),
        (
            ["gate", "--r-pullup", "1e300ohm", "--c-gate", "1e300F", "--json"],
            ["values too large to compute", "--r-pullup", "--c-gate"],
        ),
        (
            ["losses", "--iload", "1e300", "--rdson", "1", "--duty", "1"],
            ["values too large to compute", "--iload"],
        ),
        (
            # 1.1e-16 V over 1e308 ohm is below the smallest float: 0 A, an infinite time.
            ["gate", "--vdrv", "1", "--vpl", "0.9999999999999999", "--qgd", "1n"]
            + ["--r-source", "1e308", "--r-sink", "1"],
            ["values too small to compute", "turn-on plateau current", "--vpl"],
        ),
    ],
)
def test_calc_errors_name_the_options(argv, fragments):
    line = refused("calc", *argv)
    for fragment in fragments:
        assert fragment in line, line
    for internal in ("q_total_c", "v_plateau_v", "_ohm", "gate loop resistance must"):
        assert internal not in line, line


def test_zero_qgs2_is_printed_not_called_missing():
    proc = bringup(
        "calc", "gate", "--vdrv", "12", "--vpl", "4.5", "--qgd", "20n", "--qgs2", "0",
        "--r-source", "2", "--r-sink", "2",
    )  # fmt: skip
    assert proc.returncode == 0, proc.stderr
    assert "current rise (Q_gs2)      0 s" in proc.stdout and "give --qgs2" not in proc.stdout


def test_huge_but_finite_results_print_in_scientific_notation():
    # 7.4 V over 1e300 ohm is 7.4e-300 A; 1 nC at that current takes 1.35e290 s [computed].
    proc = bringup(
        "calc", "gate", "--vdrv", "12", "--vpl", "4.6", "--qgd", "1n",
        "--r-source", "1e300", "--r-sink", "1",
    )  # fmt: skip
    assert proc.returncode == 0, proc.stderr
    assert "1.351e+290 s" in proc.stdout
    assert max(len(line) for line in proc.stdout.splitlines()) < 80
