"""LibreOffice headless with tocsin's Calc add-in installed in a throwaway installation state.

Used by the tests (tests/test_calc_addin.py), the sample generator (formulas_demo.ods) and the
benchmark (bench/calc_addin.py). Facts it builds on (LibreOffice 7.4, Debian):

* ``unopkg add`` refuses to run as root without ``--shared``; ``--shared`` installs into
  ``$UNO_SHARED_PACKAGES_CACHE``, a bootstrap variable that ``-env:`` overrides. So the extension goes
  into a temporary folder given to both unopkg and soffice, with a temporary user profile: the
  machine's own installation and profiles are never touched, as root or not.
* LibreOffice runs the component in the Python it was built with (the system Python with
  python3-uno), which finds tocsin through ``TOCSIN_PYTHONPATH``: here the repository root first (the
  code under test), then the running interpreter's site-packages (numpy, pandas, statsmodels), which
  must be of the same minor Python version.
* The UNO script (tests/calc_driver.py) runs in that same system Python, starts one soffice for all
  its jobs and stops it at the end.
"""
from __future__ import annotations

import json
import os
import shutil
import signal
import subprocess
import sys
import sysconfig
import tempfile
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
DRIVER = Path(__file__).resolve().parent / "calc_driver.py"
_PYTHONS = ("/usr/bin/python3", "python3")


class CalcUnavailable(RuntimeError):
    """LibreOffice, unopkg or a Python with LibreOffice's uno module is missing (the reason says which)."""


def uno_python() -> str | None:
    """The Python that has LibreOffice's ``uno`` module (Debian: /usr/bin/python3 with python3-uno)."""
    for cand in _PYTHONS:
        exe = shutil.which(cand) or (cand if Path(cand).exists() else None)
        if exe and subprocess.run([exe, "-c", "import uno"], capture_output=True, timeout=60).returncode == 0:
            return exe
    return None


def python_version(exe: str) -> tuple[int, int]:
    out = subprocess.run([exe, "-c", "import sys; print(*sys.version_info[:2])"], capture_output=True,
                         text=True, timeout=60).stdout.split()
    return int(out[0]), int(out[1])


def tocsin_pythonpath() -> str:
    """The repository root, then this interpreter's site-packages (tocsin's dependencies)."""
    return os.pathsep.join([str(ROOT), sysconfig.get_paths()["purelib"]])


def office_path() -> str:
    """PATH without the folders of virtual environments. LibreOffice's embedded Python takes its
    standard library from the first ``python3`` on PATH when that one sits in a virtual environment
    (its ``pyvenv.cfg`` names another Python's home): with a pyenv venv first on PATH, LibreOffice
    7.4 fails to start its Python and Calc loses the add-in (found on this machine: the first
    formula throws std::bad_alloc, tocsin's functions show #NAME?)."""
    return os.pathsep.join(p for p in os.environ.get("PATH", "").split(os.pathsep)
                           if p and not (Path(p).parent / "pyvenv.cfg").exists())


def find_tools() -> tuple[str, str, str]:
    """(soffice, unopkg, uno python); CalcUnavailable says what is missing."""
    soffice = shutil.which("soffice") or shutil.which("libreoffice")
    unopkg = shutil.which("unopkg")
    python = uno_python()
    missing = [name for name, found in (("soffice", soffice), ("unopkg", unopkg),
                                        ("a Python with LibreOffice's uno module (python3-uno)", python))
               if not found]
    if missing:
        raise CalcUnavailable("not installed: " + ", ".join(missing))
    if python_version(python) != sys.version_info[:2]:
        raise CalcUnavailable(
            f"LibreOffice's Python is {'.'.join(map(str, python_version(python)))}, this one "
            f"{sys.version_info[0]}.{sys.version_info[1]}: its site-packages cannot serve LibreOffice")
    return soffice, unopkg, python


def build_oxt(folder: Path) -> Path:
    """``tocsin.oxt`` from the code under test."""
    from watcher.cli.calc_addin import write_extension
    from watcher.cli.command import CAUTION, VERSION

    return write_extension(folder, version=VERSION, caution=CAUTION)


class Calc:
    """A throwaway LibreOffice state (profile + extension folder) with tocsin's add-in installed."""

    def __init__(self, folder: Path | None = None):
        self.soffice, self.unopkg, self.python = find_tools()
        self._tmp = None
        if folder is None:
            self._tmp = tempfile.TemporaryDirectory(prefix="tocsin-calc-")
            folder = Path(self._tmp.name)
        self.folder = Path(folder)
        self.env_args = [f"-env:UserInstallation={(self.folder / 'profile').as_uri()}",
                         f"-env:UNO_SHARED_PACKAGES={(self.folder / 'shared').as_uri()}",
                         f"-env:UNO_SHARED_PACKAGES_CACHE={(self.folder / 'shared' / 'cache').as_uri()}"]
        (self.folder / "shared" / "cache").mkdir(parents=True, exist_ok=True)
        self.oxt = build_oxt(self.folder / "build")
        proc = subprocess.run([self.unopkg, "add", "--shared", "--suppress-license", *self.env_args,
                               str(self.oxt)], capture_output=True, text=True, timeout=300)
        if proc.returncode != 0:
            raise RuntimeError(f"unopkg add failed: {proc.stdout}{proc.stderr}")

    def run(self, jobs: list[dict], *, timeout: float = 600, pythonpath: str | None = None) -> dict:
        """Run the driver's jobs in one soffice; return {"start_seconds", "results": [...]}.
        ``pythonpath``: TOCSIN_PYTHONPATH for LibreOffice (default: :func:`tocsin_pythonpath`)."""
        spec = self.folder / "jobs.json"
        result = self.folder / "result.json"
        spec.write_text(json.dumps({"soffice": self.soffice, "env": self.env_args, "jobs": jobs}),
                        encoding="utf-8")
        result.unlink(missing_ok=True)
        env = {**os.environ, "PATH": office_path(),
               "TOCSIN_PYTHONPATH": tocsin_pythonpath() if pythonpath is None else pythonpath}
        env.pop("PYTHONPATH", None)       # the venv's path must not leak into the system Python
        env.pop("PYTHONHOME", None)
        # a session of its own, so that a driver that hangs is stopped together with its soffice
        proc = subprocess.Popen([self.python, str(DRIVER), str(spec), str(result)], stdout=subprocess.PIPE,
                                stderr=subprocess.PIPE, text=True, env=env, start_new_session=True)
        try:
            _, stderr = proc.communicate(timeout=timeout)
        except subprocess.TimeoutExpired:
            os.killpg(proc.pid, signal.SIGKILL)
            proc.communicate()
            raise RuntimeError(f"the UNO driver did not finish within {timeout:.0f} s") from None
        if proc.returncode != 0 or not result.exists():
            raise RuntimeError(f"the UNO driver failed ({proc.returncode}): {stderr[-3000:]}")
        return json.loads(result.read_text(encoding="utf-8"))

    def close(self) -> None:
        if self._tmp is not None:
            self._tmp.cleanup()
