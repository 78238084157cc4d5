"""Finding methods: built-ins by name, plugins by entry point or ``module:attr``.

Plugins
-------
* An installed package declares ``[project.entry-points."benchsuite.methods"]``
  ``my-solver = "mypkg.solver:MySolver"``; it is then selectable as
  ``--method my-solver``.
* Or give ``--method mypkg.solver:MySolver`` directly (the module must be
  importable, e.g. on ``PYTHONPATH``).

The target is a class (instantiated with no arguments) or a factory
function returning a method object.  It must say whether it is
``variational`` and ``stochastic`` (True/False; no default is assumed, since
these decide how its results are judged), and an entry point's name must
equal the object's ``name``.  A plugin that fails to import or breaks
the contract (:func:`contract_problems`) is reported by name with the reason;
it never stops other methods from loading.
"""

from __future__ import annotations

import importlib
import importlib.metadata
import inspect
from dataclasses import dataclass

import numpy as np

from benchsuite.errors import InputError
from benchsuite.methods.base import Option

ENTRY_POINT_GROUP = "benchsuite.methods"
#: The name the shot sampler had as a method; rows stored under it stay readable, resolving it explains.
LEGACY_SAMPLED = "sampled"


def _builtin_classes() -> dict:
    from benchsuite.methods.builtin import builtin_classes

    return builtin_classes()


def builtin_names() -> list[str]:
    return list(_builtin_classes())


def builtin_method(name: str):
    classes = _builtin_classes()
    if name not in classes:
        raise InputError(f"unknown built-in method {name!r}; built-ins: {list(classes)}", field="--method")
    return classes[name]()


@dataclass(frozen=True)
class PluginFailure:
    """A plugin that could not be used, and why."""

    name: str
    origin: str
    reason: str


def contract_problems(obj) -> list[str]:
    """What is wrong with a method object, as sentences (empty when it honours the contract)."""
    problems = []
    if not isinstance(getattr(obj, "name", None), str) or not obj.name:
        problems.append("has no 'name' string")
    if not callable(getattr(obj, "run", None)):
        problems.append("has no run(problem, options) method")
    else:
        try:
            params = inspect.signature(obj.run).parameters
            if len(params) < 2 and not any(p.kind == p.VAR_POSITIONAL for p in params.values()):
                problems.append("run() must accept (problem, options)")
        except (TypeError, ValueError):
            pass
    opts = getattr(obj, "options", ())
    if not isinstance(opts, (tuple, list)) or not all(isinstance(o, Option) for o in opts):
        problems.append("'options' must be a tuple of benchsuite.methods.base.Option")
    for attr in ("variational", "stochastic"):
        if not hasattr(obj, attr):
            problems.append(f"has no '{attr}' attribute (say True or False: it decides how results are judged)")
        elif not isinstance(getattr(obj, attr), (bool, np.bool_)):
            problems.append(f"'{attr}' must be True or False, got {getattr(obj, attr)!r}")
    return problems


def instantiate(target, origin: str):
    """A method object from a class or factory; ``(obj, None)`` or ``(None, reason)``."""
    try:
        if inspect.isclass(target):
            obj = target()
        elif hasattr(target, "run"):
            obj = target                      # an instance (or module) that is itself the method
        elif callable(target):
            obj = target()                    # a factory
        else:
            return None, f"{origin} is neither a class, a factory nor a method object"
    except Exception as exc:  # a broken plugin is reported, never fatal
        return None, f"constructing {origin} raised {type(exc).__name__}: {exc}"
    problems = contract_problems(obj)
    if problems:
        return None, f"{origin} breaks the method contract: " + "; ".join(problems)
    for attr, default in (("description", ""), ("options", ())):
        if not hasattr(obj, attr):
            try:
                setattr(obj, attr, default)
            except AttributeError:
                pass
    return obj, None


def load_target(spec: str):
    """Import ``package.module:attr``; raises ImportError/AttributeError with the reason."""
    module_name, _, attr = spec.partition(":")
    module = importlib.import_module(module_name)
    target = module
    for part in attr.split("."):
        target = getattr(target, part)
    return target


def entry_point_methods() -> tuple[dict, list[PluginFailure]]:
    """Methods declared in the ``benchsuite.methods`` entry-point group, and the failures."""
    found, failures = {}, []
    for ep in importlib.metadata.entry_points(group=ENTRY_POINT_GROUP):
        origin = f"entry point {ep.name} = {ep.value}"
        try:
            target = ep.load()
        except Exception as exc:
            failures.append(PluginFailure(ep.name, origin, f"import failed: {type(exc).__name__}: {exc}"))
            continue
        obj, reason = instantiate(target, origin)
        if obj is not None and obj.name != ep.name:
            obj, reason = None, (f"{origin}: the entry point is named {ep.name!r} but the method's "
                                 f"'name' is {obj.name!r}; they must agree")
        if obj is None:
            failures.append(PluginFailure(ep.name, origin, reason))
        else:
            found[ep.name] = obj
    return found, failures


def resolve_method(spec: str):
    """The method named by ``spec``: a built-in, an entry point or ``module:attr``.

    Returns ``(method, None)`` or ``(None, PluginFailure)`` for a plugin that cannot be used;
    an unknown plain name is an input error.
    """
    if ":" in spec:
        try:
            target = load_target(spec)
        except Exception as exc:
            return None, PluginFailure(spec, spec, f"import failed: {type(exc).__name__}: {exc}")
        obj, reason = instantiate(target, spec)
        return (obj, None) if obj is not None else (None, PluginFailure(spec, spec, reason))
    if spec in _builtin_classes():
        return builtin_method(spec), None
    plugins, failures = entry_point_methods()
    if spec in plugins:
        return plugins[spec], None
    for failure in failures:
        if failure.name == spec:
            return None, failure
    known = builtin_names() + sorted(plugins)
    if spec == LEGACY_SAMPLED:
        raise InputError("'sampled' is no longer a method: shot sampling is the measurement stage; give the "
                         "method whose state is measured and --shots N [--shot-allocation uniform|proportional] "
                         "(e.g. --method exact-sector --shots 100000)", field="--method")
    raise InputError(f"unknown method {spec!r}; known: {known} (or give package.module:attr)",
                     field="--method")


def all_methods() -> tuple[list, list[PluginFailure]]:
    """Built-ins then entry-point plugins, plus the plugins that failed."""
    plugins, failures = entry_point_methods()
    methods = [builtin_method(n) for n in builtin_names()]
    methods += [plugins[n] for n in sorted(plugins) if n not in builtin_names()]
    return methods, failures
