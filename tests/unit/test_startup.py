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
