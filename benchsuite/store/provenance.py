"""Where a run came from: package versions, git state, machine, a fresh run id.

Nothing here raises for missing information: an unknown version, commit or
dirty flag is ``None``.  Package versions are read from installed metadata,
so PySCF and OpenFermion are never imported.
"""

from __future__ import annotations

import importlib.metadata
import importlib.util
import json
import os
import platform
import secrets
import socket
import subprocess
import sys
import sysconfig
from datetime import datetime, timezone
from pathlib import Path
from urllib.parse import unquote, urlparse

#: What every run records, besides Python itself.
CORE_PACKAGES = ("benchsuite", "pyscf", "openfermion", "numpy", "scipy", "pandas")
#: Same value as :data:`benchsuite.methods.discovery.ENTRY_POINT_GROUP` (not imported: the store stays light).
METHODS_GROUP = "benchsuite.methods"
GIT_TIMEOUT_S = 10.0


def new_run_id(now: datetime | None = None) -> str:
    """``r<YYYYmmdd>-<HHMMSS>-<4 hex>``: UTC start time plus 16 random bits, e.g. ``r20261201-223015-3f9a``."""
    now = now or datetime.now(timezone.utc)
    return f"r{now:%Y%m%d-%H%M%S}-{secrets.token_hex(2)}"


def _version(dist_name: str) -> str | None:
    try:
        return importlib.metadata.version(dist_name)
    except importlib.metadata.PackageNotFoundError:
        return None


def package_versions(extra=()) -> dict:
    """``{name: version or None}`` for :data:`CORE_PACKAGES` and ``extra``, plus ``python``."""
    versions = {name: _version(name) for name in (*CORE_PACKAGES, *extra)}
    versions["python"] = platform.python_version()
    return versions


def _git(path: Path, *args: str) -> str | None:
    try:
        proc = subprocess.run(["git", "-C", str(path), *args], capture_output=True, text=True,
                              timeout=GIT_TIMEOUT_S)
    except (OSError, subprocess.SubprocessError):
        return None
    return proc.stdout if proc.returncode == 0 else None


def git_state(path=".") -> dict:
    """``{"commit": HEAD sha or None, "dirty": bool or None}`` of the checkout holding ``path``.

    Dirty means ``git status --porcelain`` lists anything: modified, staged or
    untracked-and-not-ignored files.  Both are None outside a git checkout or
    without git.
    """
    path = Path(path)
    if not path.is_dir():
        path = path.parent
    commit = _git(path, "rev-parse", "HEAD")
    if commit is None:
        return {"commit": None, "dirty": None}
    status = _git(path, "status", "--porcelain")
    return {"commit": commit.strip(), "dirty": None if status is None else bool(status.strip())}


def _direct_url_dir(dist) -> Path | None:
    """The local source folder recorded by pip (PEP 610 ``direct_url.json``), if any."""
    try:
        text = dist.read_text("direct_url.json")
        url = urlparse(json.loads(text)["url"]) if text else None
    except (ValueError, KeyError, TypeError):
        return None
    if url is None or url.scheme != "file":
        return None
    return Path(unquote(url.path))


def _installed_dirs() -> list[Path]:
    paths = {sysconfig.get_paths().get(k) for k in ("purelib", "platlib")}
    return [Path(p).resolve() for p in paths if p]


def _module_dir(module: str) -> Path | None:
    """Where a top-level module lives, if that is outside site-packages (an editable checkout)."""
    try:
        spec = importlib.util.find_spec(module.split(".")[0])
    except (ImportError, ValueError):
        return None
    if spec is None:
        return None
    where = spec.origin
    if where in (None, "namespace"):                      # a namespace package: its first folder
        where = next(iter(spec.submodule_search_locations or []), None)
    if where is None:
        return None
    folder = Path(where).resolve()
    folder = folder if folder.is_dir() else folder.parent
    if any(folder.is_relative_to(site) for site in _installed_dirs()):
        return None
    return folder


def distribution_git_state(dist_name: str | None, module: str | None = None) -> dict:
    """``{"package", "version", "commit", "dirty", "source"}`` of an installed distribution.

    The source folder is the ``file://`` URL pip recorded for a local or
    editable install, else the folder of ``module`` when it lies outside
    site-packages; its git state is read there.  A plain install from an index
    has a version and no commit.
    """
    dist = None
    if dist_name:
        try:
            dist = importlib.metadata.distribution(dist_name)
        except importlib.metadata.PackageNotFoundError:
            dist = None
    source = _direct_url_dir(dist) if dist is not None else None
    if source is None and module:
        source = _module_dir(module)
    git = git_state(source) if source is not None and source.exists() else {"commit": None, "dirty": None}
    return {"package": dist_name, "version": dist.version if dist is not None else None,
            "source": None if source is None else str(source), **git}


def _entry_point(name: str, group: str):
    for ep in importlib.metadata.entry_points(group=group):
        if ep.name == name:
            return ep
    return None


def _module_distribution(module: str) -> str | None:
    names = importlib.metadata.packages_distributions().get(module.split(".")[0], [])
    return names[0] if names else None


def plugin_provenance(method_specs, builtin_names=(), group: str = METHODS_GROUP) -> dict:
    """``{spec: distribution_git_state(...)}`` for every plugin among ``method_specs``.

    A spec is a built-in name (skipped), an entry-point name in ``group`` or
    ``module:attr``.  An unknown name gets an entry with every field None.
    """
    out = {}
    for spec in method_specs:
        if spec in builtin_names:
            continue
        if ":" in spec:
            module = spec.split(":", 1)[0]
            out[spec] = distribution_git_state(_module_distribution(module), module)
            continue
        ep = _entry_point(spec, group)
        dist = getattr(ep, "dist", None)
        out[spec] = distribution_git_state(dist.name if dist else None, ep.module if ep else None)
    return out


def _memory_bytes() -> int | None:
    try:
        return os.sysconf("SC_PAGE_SIZE") * os.sysconf("SC_PHYS_PAGES")
    except (AttributeError, ValueError, OSError):
        return None


def machine_info() -> dict:
    """Hostname, platform, CPU counts (all and usable by this process) and physical memory in bytes."""
    usable = len(os.sched_getaffinity(0)) if hasattr(os, "sched_getaffinity") else os.cpu_count()
    return {"hostname": socket.gethostname(), "platform": platform.platform(), "machine": platform.machine(),
            "python": sys.version.split()[0], "implementation": platform.python_implementation(),
            "cpu_count": os.cpu_count(), "cpu_usable": usable, "memory_bytes": _memory_bytes()}
