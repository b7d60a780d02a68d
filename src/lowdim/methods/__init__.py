"""The method registry: built-in spectral methods, the peers, and the ones users add.

Built-ins are imported on first use, so ``lowdim --help`` stays fast. They are lowdim's five
spectral methods and the peers of :mod:`lowdim.methods.peers` (scikit-learn's Isomap, LLE
forms, t-SNE and SMACOF, and UMAP when ``umap-learn`` is installed). Outside methods join by
``@register_method("name")`` in a plugin file (``--plugin path.py``), by the entry-point group
``lowdim.methods``, or by ``import = "pkg.mod:Class"`` in a suite (see :func:`import_object`).
"""

from __future__ import annotations

import importlib
import importlib.util
import sys
from collections.abc import Callable
from importlib.metadata import entry_points
from pathlib import Path
from typing import Any

from lowdim.errors import InputError, suggestion

__all__ = [
    "PCAEmbedding",
    "ClassicalMDS",
    "KernelPCA",
    "LaplacianEigenmaps",
    "DiffusionMaps",
    "IsomapEmbedding",
    "LLEEmbedding",
    "ModifiedLLEEmbedding",
    "HessianLLEEmbedding",
    "LTSAEmbedding",
    "TSNEEmbedding",
    "SmacofMDS",
    "UMAPEmbedding",
    "get_method",
    "method_names",
    "register_method",
    "load_entry_points",
    "load_plugin",
    "import_object",
    "method_origin",
    "method_unavailable",
    "has_transform",
    "PluginError",
]

# name -> (module, class name); imported lazily by get_method / attribute access.
_BUILTINS: dict[str, tuple[str, str]] = {
    "pca": ("lowdim.methods.linear", "PCAEmbedding"),
    "classical_mds": ("lowdim.methods.linear", "ClassicalMDS"),
    "kernel_pca": ("lowdim.methods.kernel_pca", "KernelPCA"),
    "laplacian_eigenmaps": ("lowdim.methods.laplacian", "LaplacianEigenmaps"),
    "diffusion_maps": ("lowdim.methods.diffusion", "DiffusionMaps"),
    # the peers: adapters around the implementations practitioners compare against
    "isomap": ("lowdim.methods.peers", "IsomapEmbedding"),
    "lle": ("lowdim.methods.peers", "LLEEmbedding"),
    "lle_modified": ("lowdim.methods.peers", "ModifiedLLEEmbedding"),
    "lle_hessian": ("lowdim.methods.peers", "HessianLLEEmbedding"),
    "ltsa": ("lowdim.methods.peers", "LTSAEmbedding"),
    "tsne": ("lowdim.methods.peers", "TSNEEmbedding"),
    "smacof": ("lowdim.methods.peers", "SmacofMDS"),
    "umap": ("lowdim.methods.peers", "UMAPEmbedding"),
}
_CLASS_TO_NAME = {cls: name for name, (_, cls) in _BUILTINS.items()}

# name -> class, for methods added by plugins and entry points; where each came from.
_ADDED: dict[str, type] = {}
_ORIGIN: dict[str, str] = {}
_entry_points_loaded = False


class PluginError(ImportError):
    """A plugin was found but failed to import: the plugin's defect, not the user's."""


def _builtin(name: str) -> type:
    module, cls = _BUILTINS[name]
    return getattr(importlib.import_module(module), cls)


def __getattr__(attr: str) -> Any:
    if attr in _CLASS_TO_NAME:
        return _builtin(_CLASS_TO_NAME[attr])
    raise AttributeError(f"module 'lowdim.methods' has no attribute {attr!r}")


def register_method(name: str, *, origin: str | None = None) -> Callable[[type], type]:
    """Class decorator adding a scikit-learn compatible transformer under ``name``.

    Registering a name that is taken is refused with a message naming both entries.
    """

    def decorate(cls: type) -> type:
        where = origin or f"{cls.__module__}.{cls.__qualname__}"
        if name in _BUILTINS:
            module, clsname = _BUILTINS[name]
            raise InputError(
                f"cannot register {where} as method {name!r}: the name is taken by the "
                f"built-in {module}.{clsname}; choose another name"
            )
        if name in _ADDED and _ADDED[name] is not cls:
            raise InputError(
                f"cannot register {where} as method {name!r}: the name is taken by "
                f"{_ORIGIN[name]}; choose another name"
            )
        _ADDED[name] = cls
        _ORIGIN[name] = where
        return cls

    return decorate


def load_entry_points() -> int:
    """Load methods from the entry-point group ``lowdim.methods`` once; return how many."""
    global _entry_points_loaded
    if _entry_points_loaded:
        return 0
    _entry_points_loaded = True
    count = 0
    for ep in entry_points(group="lowdim.methods"):
        try:
            cls = ep.load()
        except Exception as exc:
            raise PluginError(
                f"the method plugin {ep.value!r} (entry point {ep.name!r}) failed to import: "
                f"{type(exc).__name__}: {exc}"
            ) from exc
        register_method(ep.name, origin=f"entry point {ep.name} = {ep.value}")(cls)
        count += 1
    return count


def load_plugin(path: str | Path) -> list[str]:
    """Import a plugin file that registers methods; return the names it added."""
    path = Path(path)
    if not path.is_file():
        raise InputError(f"plugin file {str(path)!r} not found; give the path to a .py file")
    before = set(_ADDED)
    module_name = f"lowdim_plugin_{path.stem}_{abs(hash(str(path.resolve())))}"
    if module_name in sys.modules:
        return sorted(n for n, o in _ORIGIN.items() if o.startswith(str(path)))
    spec = importlib.util.spec_from_file_location(module_name, path)
    if spec is None or spec.loader is None:
        raise InputError(f"plugin file {str(path)!r} is not a Python module; give a .py file")
    module = importlib.util.module_from_spec(spec)
    sys.modules[module_name] = module
    try:
        spec.loader.exec_module(module)
    except InputError:
        del sys.modules[module_name]
        raise
    except Exception as exc:
        del sys.modules[module_name]
        raise PluginError(
            f"the plugin file {str(path)!r} failed to import: {type(exc).__name__}: {exc}"
        ) from exc
    added = sorted(set(_ADDED) - before)
    for name in added:
        _ORIGIN[name] = f"{path}:{_ADDED[name].__qualname__}"
    return added


def import_object(target: str) -> Any:
    """Import ``"package.module:Name"``; a missing module or name is the user's mistake."""
    if ":" not in target:
        raise InputError(f"import target {target!r} must look like 'package.module:ClassName'")
    module_name, _, attr = target.partition(":")
    try:
        module = importlib.import_module(module_name)
    except ModuleNotFoundError as exc:
        if exc.name and module_name.startswith(exc.name):
            raise InputError(
                f"cannot import {target!r}: no module named {exc.name!r}; check the spelling "
                "or install the package"
            ) from None
        raise PluginError(f"importing {target!r} failed: {exc}") from exc
    except Exception as exc:
        raise PluginError(f"importing {target!r} failed: {type(exc).__name__}: {exc}") from exc
    obj = module
    for part in attr.split("."):
        if not hasattr(obj, part):
            names = [n for n in dir(module) if not n.startswith("_")]
            raise InputError(
                f"cannot import {target!r}: {module_name!r} has no attribute {part!r}"
                f"{suggestion(part, names)}"
            )
        obj = getattr(obj, part)
    return obj


def method_names() -> list[str]:
    """Names of every registered method: the built-ins first, then added ones sorted."""
    load_entry_points()
    return list(_BUILTINS) + sorted(_ADDED)


def get_method(name: str) -> type:
    """Return the estimator class registered as ``name``."""
    load_entry_points()
    if name in _BUILTINS:
        return _builtin(name)
    if name in _ADDED:
        return _ADDED[name]
    raise InputError(
        f"unknown method {name!r}{suggestion(name, method_names())}; `lowdim methods` lists them"
    )


def method_origin(name: str) -> str:
    """Where the method ``name`` comes from (module path, plugin file or entry point).

    A peer names the package, its version and the class that implements it, e.g.
    ``"scikit-learn 1.9.1: sklearn.manifold.Isomap"``, or how to install a missing package.
    """
    if name in _BUILTINS:
        cls = _builtin(name)
        if hasattr(cls, "origin"):
            return cls.origin()
        module, clsname = _BUILTINS[name]
        return f"{module}.{clsname}"
    return _ORIGIN[name]


def method_unavailable(name: str) -> str | None:
    """Why the method ``name`` cannot run here, in one sentence with the fix, or None.

    Only a peer whose package is missing or too old has a reason, e.g. "the method 'umap'
    needs umap-learn, which is not installed: pip install 'lowdim[peers]'".
    """
    check = getattr(get_method(name), "unavailable", None)
    reason = check() if callable(check) else None
    return f"the method {name!r} {reason}" if reason else None


def has_transform(method: str | type) -> bool:
    """Whether a method (registry name or class) embeds new points with ``transform``.

    The fact is the class's ``transform`` method: t-SNE and SMACOF have none. A class that
    inherits a ``transform`` it cannot honour says so with ``supports_transform = False``.
    """
    cls = get_method(method) if isinstance(method, str) else method
    declared = getattr(cls, "supports_transform", None)
    if isinstance(declared, bool):
        return declared
    return callable(getattr(cls, "transform", None))
