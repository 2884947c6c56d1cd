"""The command line starts without the engine, the plots or the database layer: a
technician typing `drawerfit --help` or a mistyped command waits for Click, not for
scipy, matplotlib or SQLAlchemy (these load when a command needs them)."""

import subprocess
import sys

HEAVY = ("scipy", "matplotlib", "sqlalchemy", "schemdraw", "pulp", "pandas")


def test_help_loads_no_heavy_library():
    code = (
        "import sys\n"
        "from drawerfit.cli import cli\n"
        "for name in ('design', 'analyse', 'plan', 'stock', 'builds', 'demo'):\n"
        "    try:\n"
        "        cli.main([name, '--help'], standalone_mode=False)\n"
        "    except SystemExit:\n"
        "        pass\n"
        f"print(sorted(m for m in {HEAVY!r} if m in sys.modules))\n"
    )
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                         timeout=120)
    assert out.returncode == 0, out.stderr
    assert out.stdout.strip().splitlines()[-1] == "[]", out.stdout[-2000:]
