"""One definition, two engines: how a physiology equation runs on arrays and inside the compiled kernel.

An *equation* is a plain Python function of floats that does all its arithmetic through the module
global ``ops`` (never ``np`` directly) and calls only other equations. Decorated with :func:`equation`:

- called normally, ``ops`` is :mod:`.array_ops`, so it works on scalars, numpy, xarray and dask arrays;
- :func:`compiled` returns the same code object re-bound to :mod:`.scalar_ops` (and every equation it
  calls to its compiled form), compiled by numba to be inlined into the kernel.

So a change to an equation changes both engines. :func:`specialise` does the same for the kernel's
templates (functions that name a leaf model's rates as a global), binding the models of one run.

Caching: numba keys its on-disk cache on the source file of the compiled entry point, which would miss
a change to an equation inlined from another file. Entry points made by :func:`specialise` therefore
carry the list of every source file they were built from, and :class:`_SourcesCacheLocator` stamps the
cache with the content of all of them.
"""

from __future__ import annotations

import functools
import hashlib
import os
import types

import numba
from numba.core import caching

from . import scalar_ops

#: numba options of every compiled equation. error_model="numpy": a division by zero gives inf/NaN as
#: in numpy. Of the fast-math flags only "contract" (fused multiply-add): NaN and inf semantics stay
#: (nodata must propagate) and a cell's numbers do not depend on its place in a batch.
JIT_OPTIONS = dict(nogil=True, error_model="numpy", fastmath={"contract"}, _nrt=False)

_EQUATION = "__suitability_equation__"
_TEMPLATE = "__suitability_template__"
_SOURCES = "__suitability_sources__"


def equation(function):
    """Mark ``function`` as an equation: it runs on arrays as it is and compiles with :func:`compiled`."""
    setattr(function, _EQUATION, True)
    return function


def is_equation(value) -> bool:
    return getattr(value, _EQUATION, False)


def template(function):
    """Mark a kernel function whose compiled form depends on bindings given to :func:`specialise`."""
    setattr(function, _TEMPLATE, True)
    return function


def _clone(function, bindings: dict, convert, name_suffix: str = ""):
    namespace = dict(function.__globals__)
    namespace["ops"] = scalar_ops
    for name in function.__code__.co_names:
        if name in bindings:
            namespace[name] = convert(bindings[name])
        elif name in namespace:
            namespace[name] = convert(namespace[name])
    clone = types.FunctionType(function.__code__, namespace, function.__name__ + name_suffix,
                               function.__defaults__, function.__closure__)
    clone.__kwdefaults__ = function.__kwdefaults__
    clone.__qualname__ = function.__qualname__ + name_suffix
    clone.__module__ = function.__module__
    return clone


@functools.cache
def equation_sources(function) -> frozenset[str]:
    """The source files of an equation and of every equation it calls."""
    sources = {os.path.abspath(function.__code__.co_filename)}
    for name in function.__code__.co_names:
        value = function.__globals__.get(name)
        if is_equation(value):
            sources |= equation_sources(value)
    return frozenset(sources)


def _compiled_if_equation(value):
    return compiled(value) if is_equation(value) else value


@functools.cache
def compiled(function):
    """The numba form of an equation, to be inlined into compiled callers."""
    if not is_equation(function):
        raise TypeError(f"{function.__qualname__} is not marked as an equation")
    return numba.njit(inline="always", **JIT_OPTIONS)(_clone(function, {}, _compiled_if_equation))


def specialise(entry, bindings: dict, key: str):
    """Compile the template ``entry`` with the globals in ``bindings`` (e.g. the leaf models' rates).

    Templates that ``entry`` calls are specialised alike; equations (bound or called) become their
    compiled forms. ``key`` names the binding: it becomes part of the function's name, and so of its
    cache file. The returned dispatcher is cached on disk, stamped with every source file it was built
    from (``entry``'s, the templates', and every equation's).
    """
    suffix = "__" + "".join(c if c.isalnum() else "_" for c in key)
    sources = {os.path.abspath(entry.__code__.co_filename)}

    @functools.cache
    def convert(value):
        if getattr(value, _TEMPLATE, False):
            sources.add(os.path.abspath(value.__code__.co_filename))
            return numba.njit(inline="always", **JIT_OPTIONS)(_clone(value, bindings, convert, suffix))
        if is_equation(value):
            sources.update(equation_sources(value))
            return compiled(value)
        return value

    clone = _clone(entry, bindings, convert, suffix)
    setattr(clone, _SOURCES, frozenset(sources))
    return numba.njit(cache=True, **JIT_OPTIONS)(clone)


class _SourcesCacheLocator(caching._CacheLocator):
    """Cache locator of :func:`specialise`'s entry points: stamped with all their source files."""

    def __init__(self, py_func, py_file):
        self._py_file = py_file
        self._sources = sorted(getattr(py_func, _SOURCES))
        self._lineno = py_func.__code__.co_firstlineno
        if numba.config.CACHE_DIR:
            self._cache_path = os.path.join(numba.config.CACHE_DIR, self.get_suitable_cache_subpath(py_file))
        else:
            self._cache_path = os.path.join(os.path.dirname(py_file), "__pycache__")

    def get_cache_path(self):
        return self._cache_path

    def get_source_stamp(self):
        digest = hashlib.sha256()
        for path in self._sources:
            with open(path, "rb") as handle:
                digest.update(path.encode() + b"\0" + handle.read())
        return digest.hexdigest()

    def get_disambiguator(self):
        return str(self._lineno)

    @classmethod
    def from_function(cls, py_func, py_file):
        if not hasattr(py_func, _SOURCES) or not os.path.exists(py_file):
            return None
        self = cls(py_func, py_file)
        try:
            self.ensure_cache_path()
        except OSError:
            # A read-only install: numba's user-wide cache directory instead.
            self._cache_path = os.path.join(caching.UserWideCacheLocator(py_func, py_file).get_cache_path())
            try:
                self.ensure_cache_path()
            except OSError:
                return None
        return self


if _SourcesCacheLocator not in caching.CacheImpl._locator_classes:
    caching.CacheImpl._locator_classes.insert(0, _SourcesCacheLocator)
