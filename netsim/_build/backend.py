"""The package's build backend: setuptools, plus the event engine compiled with mypyc.

pip builds netsim through this module (pyproject.toml, ``[build-system]``). It is setuptools'
own backend with one addition: ``netsim/engine/des.py`` and ``netsim/engine/policies.py`` (the
event engine and its slot broker) are compiled by mypyc, part of mypy, into one C extension,
about 1.7 times faster on a metro grid. The Python files stay the source and ship as well. The
extension is optional: with no C compiler, or with NETSIM_PURE_PYTHON=1 set during the install,
netsim installs as plain Python and runs the same engine more slowly. Beside the compiled files
the build writes the SHA-256 of the sources it compiled; ``netsim.engine.build`` uses the
compiled modules only while the sources still match it.

This directory is on the path only while pip builds; it ships in the source distribution (which
builds through it) and in the installed package, which never imports it.
"""

from __future__ import annotations

import hashlib
import os
from pathlib import Path
from typing import Any

from setuptools import build_meta as _setuptools
from setuptools.command.build_ext import build_ext

ROOT = Path(__file__).resolve().parents[2]
#: compiled as one group (the engine calls the broker natively); the same list as
#: netsim.engine.build.COMPILED
NATIVE = ("netsim/engine/policies.py", "netsim/engine/des.py")
DIGEST_FILE = "compiled-source.sha256"


def source_digest(root: Path = ROOT) -> str:
    """SHA-256 of the compiled sources, in the order of NATIVE (netsim.engine.build repeats it)."""
    digest = hashlib.sha256()
    for path in NATIVE:
        digest.update((root / path).read_bytes())
    return digest.hexdigest()


class _BuildWithDigest(build_ext):
    """build_ext that records, beside the compiled modules, which sources they came from.

    The digest is written only when every extension compiled in this run. An optional extension
    that fails leaves a warning and, in an in-place (editable) build, the file of an earlier
    build in place: with a fresh digest beside it, the old engine would run as if current.
    """

    def run(self) -> None:
        self.failed: list[str] = []
        built = [Path(self.get_ext_fullpath(ext.name)) for ext in self.extensions]
        if built:
            (built[-1].parent / DIGEST_FILE).unlink(missing_ok=True)
        super().run()
        if built and not self.failed and all(path.exists() for path in built):
            (built[-1].parent / DIGEST_FILE).write_text(source_digest() + "\n")

    def build_extension(self, ext: Any) -> None:
        try:
            super().build_extension(ext)
        except Exception:  # an optional one is then skipped with a warning (build_ext)
            self.failed.append(ext.name)
            raise


def _extensions() -> list[Any]:
    if os.environ.get("NETSIM_PURE_PYTHON"):
        return []
    try:
        from mypyc.build import mypycify
    except ImportError:  # mypy missing from the build environment: plain Python
        return []
    old = Path.cwd()
    os.chdir(ROOT)  # mypyc names modules by their paths relative to the working directory
    try:
        modules = mypycify(["--config-file", "pyproject.toml", *NATIVE], opt_level="3",
                           group_name="netsim.engine._native")
    finally:
        os.chdir(old)
    for module in modules:
        module.optional = True  # a failed compile leaves plain Python, not a failed install
    return modules


class _Backend(_setuptools._BuildMetaBackend):
    def run_setup(self, setup_script: str = "setup.py") -> None:
        from setuptools import setup

        setup(ext_modules=_extensions(), cmdclass={"build_ext": _BuildWithDigest})


_BACKEND = _Backend()
get_requires_for_build_wheel = _BACKEND.get_requires_for_build_wheel
get_requires_for_build_sdist = _BACKEND.get_requires_for_build_sdist
prepare_metadata_for_build_wheel = _BACKEND.prepare_metadata_for_build_wheel
build_wheel = _BACKEND.build_wheel
build_sdist = _BACKEND.build_sdist
get_requires_for_build_editable = _BACKEND.get_requires_for_build_editable
prepare_metadata_for_build_editable = _BACKEND.prepare_metadata_for_build_editable
build_editable = _BACKEND.build_editable
