"""Which build of the event engine runs: compiled with mypyc, or plain Python.

``pip install`` compiles :mod:`netsim.engine.des` and :mod:`netsim.engine.policies` with mypyc
where it can (``netsim/_build/backend.py``); the same source files run as plain Python where it
cannot. Both builds follow the same code line by line, so they give the same numbers: a test
runs both on the same seeds and compares every figure exactly.

A compiled module always wins over its source when Python imports it, so an edited ``des.py`` would
silently not run. To prevent that the build writes the SHA-256 of the sources it compiled beside
the compiled files, and :func:`select` (called by ``netsim.engine`` before anything imports the two
modules) loads the plain sources instead when they no longer match, or when the environment sets
``NETSIM_PURE_PYTHON`` to anything but ``0`` or empty. Reinstalling (``pip install -e .``) compiles
the edited sources.

``BUILD`` says which build this process runs: ``"compiled"`` or ``"python"``.
"""

from __future__ import annotations

import hashlib
import importlib.util
import os
import sys
from pathlib import Path
from types import ModuleType

__all__ = ["BUILD", "COMPILED", "compiled_present", "plain_engine", "select", "source_digest"]

#: the compiled modules, in load order (des imports policies); the same list as the build backend's
COMPILED = ("netsim.engine.policies", "netsim.engine.des")
DIGEST_FILE = "compiled-source.sha256"
HERE = Path(__file__).resolve().parent


def _source(name: str) -> Path:
    return HERE / (name.rsplit(".", 1)[1] + ".py")


def source_digest() -> str:
    """SHA-256 of the compiled modules' sources as they are now (the build backend's digest)."""
    digest = hashlib.sha256()
    for name in COMPILED:
        digest.update(_source(name).read_bytes())
    return digest.hexdigest()


def compiled_present() -> bool:
    """Whether importing the engine's modules would load compiled extensions."""
    for name in COMPILED:
        spec = importlib.util.find_spec(name)
        if spec is None or spec.origin is None or spec.origin.endswith(".py"):
            return False
    return True


def _compiled_current() -> bool:
    try:
        return (HERE / DIGEST_FILE).read_text().strip() == source_digest()
    except OSError:
        return False


def _exec_source(name: str, as_name: str) -> ModuleType:
    """Execute the plain source of module ``name`` as module ``as_name`` (registered in sys.modules)."""
    spec = importlib.util.spec_from_file_location(as_name, _source(name))
    assert spec is not None and spec.loader is not None
    module = importlib.util.module_from_spec(spec)
    sys.modules[as_name] = module
    try:
        spec.loader.exec_module(module)
    except BaseException:
        del sys.modules[as_name]
        raise
    return module


def select() -> str:
    """Choose the build for this process (before the engine's modules are imported) and return it."""
    if not compiled_present():
        return "python"
    if os.environ.get("NETSIM_PURE_PYTHON", "") not in ("", "0") or not _compiled_current():
        for name in COMPILED:
            if name not in sys.modules:
                _exec_source(name, name)
        return "python"
    return "compiled"


def plain_engine() -> ModuleType:
    """A separate plain-Python copy of :mod:`netsim.engine.des` bound to its own plain copy of
    :mod:`netsim.engine.policies` (the reference the compiled build is compared with; tests that
    patch the engine's internals patch this copy). The modules in use are left as they are."""
    policies_name = COMPILED[0]
    saved = sys.modules.get(policies_name)
    policies = _exec_source(policies_name, "netsim.engine._plain_policies")
    sys.modules[policies_name] = policies  # the copy of des binds the plain broker
    try:
        return _exec_source(COMPILED[1], "netsim.engine._plain_des")
    finally:
        if saved is None:
            del sys.modules[policies_name]
        else:
            sys.modules[policies_name] = saved


BUILD = select()
