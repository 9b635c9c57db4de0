"""Reading a YAML config and saying what is wrong with it.

:func:`load_config` reads the file with ``yaml.safe_load`` semantics (plus a duplicate-key check) and turns
every validation problem into one :class:`~suitability.errors.ConfigError` that names the file, the line,
the dotted key (``scenarios[2].co2_ppm``) and what was expected.

What a config file may cost is bounded before it is parsed or validated: at most
:data:`MAX_CONFIG_BYTES` bytes, read from a regular file only (not a device or a pipe), and at most
:data:`MAX_CONFIG_NODES` YAML nodes once every alias is expanded (an "alias bomb" of a few lines can stand
for billions of values); aliases that contain themselves are refused.
"""

from __future__ import annotations

from collections.abc import Hashable

import os
import stat
import types
import typing
from pathlib import Path
from typing import Annotated, Any, Union

import yaml
from pydantic import BaseModel, RootModel, ValidationError

from ..errors import ConfigError
from .schema import RunConfig, _did_you_mean

class _UniqueKeyLoader(yaml.SafeLoader):
    """SafeLoader that rejects a key given twice in one mapping (plain safe_load keeps the last silently)."""


def _no_duplicate_keys(loader: _UniqueKeyLoader, node: yaml.MappingNode, deep: bool = False):
    seen: dict[Any, int] = {}
    for key_node, _ in node.value:
        key = loader.construct_object(key_node, deep=deep)
        if not isinstance(key, Hashable):  # YAML allows a list or mapping as a key ("? [a, b]"); no config does
            raise yaml.constructor.ConstructorError(
                None, None, f"a key must be a name, not a {type(key).__name__}", key_node.start_mark
            )
        if key in seen:
            raise yaml.constructor.ConstructorError(
                None, None, f"key {key!r} is given twice (first on line {seen[key]})", key_node.start_mark
            )
        seen[key] = key_node.start_mark.line + 1
    return loader.construct_mapping(node, deep=deep)


_UniqueKeyLoader.add_constructor(yaml.resolver.BaseResolver.DEFAULT_MAPPING_TAG, _no_duplicate_keys)

#: Largest config file read [bytes]. Real configs are a few kilobytes; the documented starter is ~10 KB.
MAX_CONFIG_BYTES = 1024 * 1024
#: Most YAML nodes (keys, values, list items) a config may stand for with its aliases expanded.
MAX_CONFIG_NODES = 100_000


def _read_bounded(path: Path) -> str:
    """The text of ``path``: a regular file of at most MAX_CONFIG_BYTES bytes, UTF-8."""
    try:
        info = os.stat(path)
    except FileNotFoundError:
        raise ConfigError(f"{path}: config file not found") from None
    except OSError as exc:
        raise ConfigError(f"{path}: cannot read the config file ({exc})") from None
    if not stat.S_ISREG(info.st_mode):
        raise ConfigError(f"{path}: not a regular file; expected a YAML config file")
    try:
        with open(path, "rb") as handle:
            data = handle.read(MAX_CONFIG_BYTES + 1)
    except OSError as exc:
        raise ConfigError(f"{path}: cannot read the config file ({exc})") from None
    if len(data) > MAX_CONFIG_BYTES:
        raise ConfigError(f"{path}: the config file is larger than {MAX_CONFIG_BYTES // 1024} KiB; a config "
                          "is a few kilobytes of YAML (data belong in the files it points to)")
    try:
        return data.decode("utf-8")
    except UnicodeDecodeError as exc:
        raise ConfigError(f"{path}: cannot read the config file ({exc})") from None


def _expanded_size(root: yaml.Node, path: Path) -> int:
    """Number of nodes ``root`` stands for with aliases expanded; refuses more than MAX_CONFIG_NODES and
    aliases that contain themselves. Linear in the number of distinct nodes (shared nodes counted once)."""
    sizes: dict[int, int] = {}
    active: set[int] = set()

    def size(node: yaml.Node) -> int:
        key = id(node)
        if key in sizes:
            return sizes[key]
        if key in active:
            raise ConfigError(f"{path}: line {node.start_mark.line + 1}: an alias refers to the value that "
                              "contains it; expected a config without recursive aliases")
        active.add(key)
        total = 1
        if isinstance(node, yaml.MappingNode):
            for key_node, value_node in node.value:
                total += size(key_node) + size(value_node)
                if total > MAX_CONFIG_NODES:
                    break
        elif isinstance(node, yaml.SequenceNode):
            for item in node.value:
                total += size(item)
                if total > MAX_CONFIG_NODES:
                    break
        active.discard(key)
        sizes[key] = total
        if total > MAX_CONFIG_NODES:
            raise ConfigError(
                f"{path}: with its aliases (*name) expanded the config stands for more than {MAX_CONFIG_NODES:,} "
                f"values (the mapping or list at line {node.start_mark.line + 1} alone); expected a config of "
                "ordinary size: use fewer or smaller aliases"
            )
        return total

    return size(root)


def _parse(text: str, path: Path):
    """(data, root node) of the YAML ``text``, with duplicate keys refused and the size bounded."""
    loader = _UniqueKeyLoader(text)
    try:
        root = loader.get_single_node()
        if root is None:
            return None, None
        _expanded_size(root, path)
        return loader.construct_document(root), root
    finally:
        loader.dispose()


def load_config(path: str | Path) -> RunConfig:
    """Read and validate a YAML config. Raises ConfigError naming the file, line, key and what was expected."""
    path = Path(path).expanduser()
    text = _read_bounded(path)
    try:
        data, root = _parse(text, path)  # a SafeLoader subclass
    except RecursionError:
        raise ConfigError(f"{path}: the YAML is nested too deeply; expected a config of ordinary size") from None
    except yaml.YAMLError as exc:
        raise ConfigError(f"{path}: {_yaml_problem(exc)}") from None
    if data is None:
        raise ConfigError(f"{path}: the config file is empty; expected the sections region, climate, scenarios, ...")
    if not isinstance(data, dict):
        raise ConfigError(f"{path}: expected a mapping of sections (region, climate, scenarios, ...), got {type(data).__name__}")
    lines = _key_lines(root)
    _refuse_placeholders(data, path, lines)
    context = {"config_dir": path.parent.absolute(), "source_path": path}
    try:
        return RunConfig.model_validate(data, context=context)
    except ValidationError as exc:
        raise ConfigError(format_validation_error(exc, path, lines)) from None


def validate_config(data: dict, config_dir: str | Path | None = None) -> RunConfig:
    """Validate a config given as a Python mapping; relative paths resolve against ``config_dir`` (default cwd).

    Raises ConfigError with the same messages as :func:`load_config`.
    """
    source = "<config>"
    _refuse_placeholders(data, source, {})
    try:
        return RunConfig.model_validate(data, context={"config_dir": Path(config_dir or Path.cwd()).absolute()})
    except ValidationError as exc:
        raise ConfigError(format_validation_error(exc, source, {})) from None


def validate_section(model: type[BaseModel], data: Any, key: str) -> BaseModel:
    """One config section given in Python (a mapping or an object with its attributes), validated by its model.

    For library callers that pass a section without a whole config (e.g. ``compute_context(settings)``): the
    schema is the only place that says what is valid. An instance of ``model`` is returned as it is (it was
    validated when built); otherwise the attributes ``model`` knows are read (missing or None ones take the
    model's defaults). Raises ConfigError naming ``key.<field>`` and what was expected.
    """
    if isinstance(data, model):
        return data
    if isinstance(data, dict):
        values = {k: v for k, v in data.items() if v is not None}
    else:
        values = {k: getattr(data, k) for k in model.model_fields if getattr(data, k, None) is not None}
    try:
        return model.model_validate(values)
    except ValidationError as exc:
        problems = [f"{dotted_key((key,) + tuple(e['loc']))}: {_explain(e, tuple(e['loc']))}"
                    for e in exc.errors(include_url=False)]
        raise ConfigError("; ".join(problems)) from None


#: The value `suitability init` writes where the user must decide (suitability/templates/starter.yaml).
PLACEHOLDER = "EDIT-ME"


def placeholders(data: Any, loc: tuple = ()) -> list[tuple]:
    """Locations (key tuples) of every value still holding the starter template's :data:`PLACEHOLDER`."""
    if isinstance(data, str):
        return [loc] if data.strip().upper().startswith(PLACEHOLDER) else []
    if isinstance(data, dict):
        return [found for key, value in data.items() for found in placeholders(value, loc + (key,))]
    if isinstance(data, (list, tuple)):
        return [found for i, value in enumerate(data) for found in placeholders(value, loc + (i,))]
    return []


def _refuse_placeholders(data: Any, source: Any, lines: dict[tuple, int]) -> None:
    found = placeholders(data)
    if not found:
        return
    where = [dotted_key(loc) + (f" (line {lines[loc]})" if loc in lines else "") for loc in found]
    raise ConfigError(
        f"{source}: edit me: {len(found)} value(s) still hold the starter placeholder {PLACEHOLDER}: "
        f"{', '.join(where)}. Replace each with your value (the comment beside it says what is expected)."
    )


def _yaml_problem(exc: yaml.YAMLError) -> str:
    mark = getattr(exc, "problem_mark", None) or getattr(exc, "context_mark", None)
    problem = getattr(exc, "problem", None) or str(exc)
    context = getattr(exc, "context", None)
    where = f"line {mark.line + 1}, column {mark.column + 1}: " if mark is not None else ""
    # An unclosed quote or bracket is found only at the end of the file; where it starts is what to fix.
    started = getattr(exc, "context_mark", None)
    if context and started is not None and mark is not None and started.line != mark.line:
        context = f"{context} that starts on line {started.line + 1}, column {started.column + 1}"
    return f"{where}YAML error: {problem}" + (f" ({context})" if context else "")


def _key_lines(root: yaml.Node | None) -> dict[tuple, int]:
    """Line number (1-based) of every key and list item of the composed YAML, by location tuple.

    A node reached again through an alias is not walked again (its keys keep the lines of where it is
    written), so the walk is linear in the size of the file, whatever its aliases stand for.
    """
    lines: dict[tuple, int] = {}
    walked: set[int] = set()

    def walk(node, loc: tuple) -> None:
        lines[loc] = node.start_mark.line + 1
        if id(node) in walked:
            return
        walked.add(id(node))
        if isinstance(node, yaml.MappingNode):
            for key_node, value_node in node.value:
                key = key_node.value
                lines[loc + (key,)] = key_node.start_mark.line + 1
                walk(value_node, loc + (key,))
                lines[loc + (key,)] = key_node.start_mark.line + 1
        elif isinstance(node, yaml.SequenceNode):
            for i, item in enumerate(node.value):
                walk(item, loc + (i,))

    if root is not None:
        walk(root, ())
    return lines


def format_validation_error(exc: ValidationError, source: str | Path, lines: dict[tuple, int]) -> str:
    """One message listing every problem as ``line N, dotted.key: what was expected``."""
    problems = []
    for error in exc.errors(include_url=False):
        loc = tuple(error["loc"])
        if error["type"] == "unknown_key":
            loc = loc + (error["ctx"]["key"],)
        elif error["type"] == "located":
            loc = loc + tuple(error["ctx"]["at"])
        key = dotted_key(loc) or "(top level)"
        line = _line_of(loc, lines)
        where = f"line {line}, " if line else ""
        problems.append(f"{where}{key}: {_explain(error, loc)}")
    head = f"{source}: {len(problems)} problem{'s' if len(problems) > 1 else ''} in the config"
    return head + "\n" + "\n".join(f"  - {p}" for p in problems)


def dotted_key(loc: tuple) -> str:
    """('scenarios', 2, 'co2_ppm') -> 'scenarios[2].co2_ppm'."""
    text = ""
    for part in loc:
        text += f"[{part}]" if isinstance(part, int) else (f".{part}" if text else str(part))
    return text


def _line_of(loc: tuple, lines: dict[tuple, int]) -> int | None:
    for end in range(len(loc), -1, -1):
        if loc[:end] in lines:
            return lines[loc[:end]]
    return None


def _explain(error: dict, loc: tuple) -> str:
    kind, message = error["type"], error["msg"]
    if kind == "extra_forbidden":
        valid = _valid_keys(loc[:-1])
        return f"unknown key{_did_you_mean(str(loc[-1]), valid)}" + (f" (valid keys here: {', '.join(valid)})" if valid else "")
    if kind == "missing":
        return "required key is missing"
    if kind in ("unknown_key", "located"):
        return message
    if kind in _PLAIN_WORDS:  # pydantic names Python classes here; say it in the words of a YAML file
        return f"{_PLAIN_WORDS[kind]} (got {error.get('input')!r})"
    message = message.removeprefix("Value error, ").removeprefix("Assertion failed, ")
    if kind not in ("value_error", "assertion_error"):
        message = f"{message[0].lower()}{message[1:]} (got {error.get('input')!r})"
    return message


_PLAIN_WORDS = {
    "model_type": "expected a section of 'key: value' entries",
    "dict_type": "expected a section of 'key: value' entries",
    "model_attributes_type": "expected a section of 'key: value' entries",
    "path_type": "expected a file or folder path as text",
}


def _valid_keys(loc: tuple) -> list[str]:
    """Field names of the model found at ``loc`` in the schema (empty if it is not a model)."""
    node: Any = RunConfig
    for part in loc:
        node = _strip_optional(node)
        if isinstance(part, int):
            args = typing.get_args(node)
            node = args[0] if args else None
        elif isinstance(node, type) and issubclass(node, RootModel):
            node = typing.get_args(node.model_fields["root"].annotation)[1]
        elif isinstance(node, type) and issubclass(node, BaseModel) and part in node.model_fields:
            node = node.model_fields[part].annotation
        else:
            return []
    node = _strip_optional(node)
    if isinstance(node, type) and issubclass(node, BaseModel) and not issubclass(node, RootModel):
        return list(node.model_fields)
    return []


def _strip_optional(node: Any) -> Any:
    while typing.get_origin(node) is Annotated:
        node = typing.get_args(node)[0]
    if typing.get_origin(node) in (Union, types.UnionType):
        members = [a for a in typing.get_args(node) if a is not type(None)]
        if len(members) == 1:
            return _strip_optional(members[0])
    return node
