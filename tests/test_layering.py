"""The library never imports the view layer: every vesselnet module imports with plotly blocked.

A meta-path finder placed first on ``sys.meta_path`` refuses plotly, viz and
kaleido; each check runs in a fresh interpreter so that nothing imported by
other tests hides an import.
"""

from __future__ import annotations

import pkgutil
import subprocess
import tempfile
import sys

import pytest

import vesselnet

BLOCKER = '''
import importlib.abc, sys
class Blocker(importlib.abc.MetaPathFinder):
    def find_spec(self, name, path=None, target=None):
        if name.split(".")[0] in ("plotly", "viz", "kaleido"):
            raise ImportError(f"blocked for the layering test: {name}")
        return None
sys.meta_path.insert(0, Blocker())
'''


def library_modules() -> list[str]:
    """Every module of the vesselnet package (command line included), found on disk.

    ``vesselnet.__main__`` runs the command line when imported; the command-line
    tests below cover it.
    """
    names = ["vesselnet"]
    for info in pkgutil.walk_packages(vesselnet.__path__, "vesselnet."):
        if info.name != "vesselnet.__main__":
            names.append(info.name)
    return sorted(names)


def run(code: str) -> subprocess.CompletedProcess:
    return subprocess.run([sys.executable, "-c", BLOCKER + code], capture_output=True, text=True,
                          cwd=tempfile.gettempdir(), timeout=120)  # the installed package, not the source tree


def test_blocker_blocks():
    """The check can fail: with the blocker in place, plotly and viz do not import."""
    done = run("import viz")
    assert done.returncode != 0 and "blocked for the layering test" in done.stderr


def test_every_library_module_imports_without_plotly():
    modules = library_modules()
    assert "vesselnet.cli.view" in modules and "vesselnet.solve" in modules
    code = "import importlib\n" + "".join(f"importlib.import_module({m!r})\n" for m in modules)
    code += "import sys\nassert not [m for m in sys.modules if m.split('.')[0] in ('plotly', 'viz')]\n"
    done = run(code)
    assert done.returncode == 0, done.stderr


@pytest.mark.parametrize("argv", [["--help"], ["solve", "--help"], ["view", "--help"]])
def test_command_line_starts_without_plotly(argv):
    """Parsing the command line (all commands registered) needs no plotly."""
    done = run(f"from vesselnet.cli import main\nimport sys\nsys.argv=['vesselnet']\n"
               f"try:\n    main({argv!r})\nexcept SystemExit as e:\n    assert e.code == 0, e.code\n")
    assert done.returncode == 0, done.stderr
