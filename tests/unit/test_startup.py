"""`bringup --help` and the analysis commands must not import Textual or PyVISA (start-up speed)."""

import subprocess
import sys

import pytest

HEAVY = ("textual", "pyvisa", "scipy")


@pytest.mark.parametrize("argv", [["--help"], ["analyze", "--help"], ["calc", "--help"]])
def test_light_commands_do_not_import_heavy_packages(argv):
    code = (
        "import sys\n"
        "from bringup.cli import main\n"
        "try:\n"
        f"    main({argv!r})\n"
        "except SystemExit:\n"
        "    pass\n"
        f"loaded = [m for m in {HEAVY!r} if m in sys.modules]\n"
        "print('LOADED=' + ','.join(loaded))\n"
    )
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip().splitlines()[-1] == "LOADED=", f"heavy imports: {out.stdout!r}"


def test_the_design_equations_do_not_import_numpy():
    # `bringup calc` is plain arithmetic: numpy (pulled in through `bringup.analysis`) would
    # cost more than the command (benchmarks/bench_startup.py times it).
    code = (
        "import sys\n"
        "from bringup.cli import main\n"
        "main(['calc', 'bootstrap', '--qg', '40n', '--iq', '150u', '--ileak', '1u',\n"
        "      '--fsw', '100k', '--duty-max', '0.9', '--dv', '0.5'])\n"
        "from bringup.analysis import parse_quantity, format_quantity\n"
        "parse_quantity('1.5 mA', 'A'), format_quantity(1e-9, 's')\n"
        "loaded = [m for m in ('numpy', *" + repr(HEAVY) + ") if m in sys.modules]\n"
        "print('LOADED=' + ','.join(loaded))\n"
    )
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert "C_min" in out.stdout
    assert out.stdout.strip().splitlines()[-1] == "LOADED=", f"heavy imports: {out.stdout!r}"


def test_the_analysis_package_keeps_its_public_names():
    # Loaded on first use now: every name in __all__ still resolves, from the module it names.
    import bringup.analysis as analysis
    from bringup.analysis import edges, quantities

    for name in analysis.__all__:
        assert getattr(analysis, name) is not None, name
    assert analysis.measure_edges is edges.measure_edges
    assert analysis.parse_quantity is quantities.parse_quantity
    with pytest.raises(AttributeError):
        analysis.no_such_name  # noqa: B018
