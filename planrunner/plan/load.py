"""Reading a plan file: bytes -> YAML nodes with positions -> validated :class:`Plan`.

Every problem is reported as ``file:line:column: dotted.path: message``, all problems of one
stage at once, sorted by line. Any failure raises :class:`planrunner.errors.PlanError`
(exit 2) with one line per problem in ``.problems``; nothing else escapes.

The YAML subset a plan may use is deliberately small, because an audited plan must mean
exactly what it says:

* one document holding a mapping; at most :data:`MAX_PLAN_BYTES` bytes; UTF-8 (a UTF-8
  byte-order mark at the very start is accepted and ignored; UTF-16 and UTF-32 are refused);
* no duplicate keys (plain YAML tools silently keep the last one), no anchors or aliases, no
  explicit tags (``!!str``, ``!thing``), no nesting deeper than :data:`MAX_DEPTH`;
* plain values are read by the YAML 1.2 core rules, not YAML 1.1: only ``true``/``false`` are
  booleans (``yes``, ``no``, ``on``, ``off`` stay text), ``null``/``~``/empty is null, decimal
  integers and floats are numbers, and dates, octal or sexagesimal numbers stay text.
"""

from __future__ import annotations

import codecs
import os
import re
import types
from collections.abc import Mapping
from dataclasses import dataclass, field
from pathlib import Path
from typing import Annotated, Any, Literal, Union, get_args, get_origin

import yaml
from pydantic import BaseModel, ValidationError
from pydantic.fields import FieldInfo

from ..errors import PlanError
from .fingerprint import Fingerprints, fingerprints
from .model import Plan, PlanWarning, format_path, plan_warnings, suggest

#: Largest plan file read, in bytes.
MAX_PLAN_BYTES = 1024 * 1024

#: Deepest nesting of lists and mappings accepted.
MAX_DEPTH = 32

_STR = "tag:yaml.org,2002:str"
_INT = "tag:yaml.org,2002:int"
_FLOAT = "tag:yaml.org,2002:float"
_BOOL = "tag:yaml.org,2002:bool"
_NULL = "tag:yaml.org,2002:null"

Loc = tuple[str | int, ...]


# --------------------------------------------------------------------------------------------
# results


@dataclass(frozen=True, slots=True)
class PlanNotice:
    """One located message about a plan (a problem or a warning)."""

    source: str
    line: int
    column: int
    path: str
    message: str

    def __str__(self) -> str:
        place = f"{self.source}:{self.line}:{self.column}"
        return f"{place}: {self.path}: {self.message}" if self.path else f"{place}: {self.message}"


@dataclass(frozen=True)
class LoadedPlan:
    """A validated plan with everything needed to audit it."""

    model: Plan
    path: Path | None
    raw: bytes = field(repr=False)
    fingerprints: Fingerprints
    warnings: tuple[PlanNotice, ...] = ()
    #: (line, column) of every value in the file, by path tuple (e.g. ``("data", "levels", 1)``).
    positions: Mapping[Loc, tuple[int, int]] = field(default_factory=dict, repr=False)

    @property
    def source(self) -> str:
        return str(self.path) if self.path is not None else "<plan>"

    @property
    def data_path(self) -> Path:
        """``data.file`` resolved relative to the plan file's folder."""
        return resolve_data_path(self.path, self.model.data.file)

    def where(self, loc: Loc) -> tuple[int, int] | None:
        """(line, column) of the value at ``loc``, or of its nearest enclosing value."""
        loc = tuple(loc)
        for n in range(len(loc), -1, -1):
            if loc[:n] in self.positions:
                return self.positions[loc[:n]]
        return None


def resolve_data_path(plan_path: str | os.PathLike[str] | None, data_file: str) -> Path:
    """A plan's ``data.file``: absolute paths as given, relative ones from the plan's folder."""
    target = Path(data_file)
    if target.is_absolute() or plan_path is None:
        return target
    return Path(plan_path).parent / target


# --------------------------------------------------------------------------------------------
# the YAML layer


class _Refused(Exception):
    """A problem that ends reading at once (syntax, encoding, size)."""

    def __init__(self, line: int, column: int, message: str) -> None:
        super().__init__(message)
        self.line, self.column, self.message = line, column, message


class _PlanLoader(yaml.SafeLoader):
    """SafeLoader composing nodes only, with YAML 1.2 core scalars and refusals recorded."""

    yaml_implicit_resolvers: dict[Any, Any] = {}

    def __init__(self, stream: str) -> None:
        super().__init__(stream)
        self.refusals: list[tuple[int, int, str]] = []
        self._depth = 0

    def _refuse(self, mark: Any, message: str) -> None:
        self.refusals.append((mark.line + 1, mark.column + 1, message))

    def compose_node(self, parent: Any, index: Any) -> Any:
        if self.check_event(yaml.AliasEvent):
            event = self.get_event()
            self._refuse(
                event.start_mark,
                f"alias *{event.anchor} is not allowed; write the value out in full.",
            )
            return yaml.ScalarNode(_NULL, "", event.start_mark, event.end_mark)
        event = self.peek_event()
        if event.anchor is not None:
            self._refuse(
                event.start_mark,
                f"anchor &{event.anchor} is not allowed; write every value out in full.",
            )
        tag = getattr(event, "tag", None)
        if tag is not None:
            self._refuse(
                event.start_mark,
                f"tag {tag} is not allowed; a plan uses plain values without tags.",
            )
        self._depth += 1
        try:
            if self._depth > MAX_DEPTH:
                mark = event.start_mark
                raise _Refused(mark.line + 1, mark.column + 1,
                               f"nesting deeper than {MAX_DEPTH} levels is not allowed.")
            return super().compose_node(parent, index)
        finally:
            self._depth -= 1


_PlanLoader.add_implicit_resolver(
    _BOOL, re.compile(r"^(?:true|True|TRUE|false|False|FALSE)$"), list("tTfF")
)
_PlanLoader.add_implicit_resolver(_INT, re.compile(r"^[-+]?[0-9]+$"), list("-+0123456789"))
_PlanLoader.add_implicit_resolver(
    _FLOAT,
    re.compile(
        r"^(?:[-+]?(?:\.[0-9]+|[0-9]+(?:\.[0-9]*)?)(?:[eE][-+]?[0-9]+)?"
        r"|[-+]?\.(?:inf|Inf|INF)|\.(?:nan|NaN|NAN))$"
    ),
    list("-+0123456789."),
)
_PlanLoader.add_implicit_resolver(_NULL, re.compile(r"^(?:~|null|Null|NULL|)$"), list("~nN") + [""])


def _decode(raw: bytes) -> str:
    if len(raw) > MAX_PLAN_BYTES:
        raise _Refused(1, 1, f"the file is larger than {MAX_PLAN_BYTES} bytes; a plan is "
                             "short text.")
    if raw.startswith((codecs.BOM_UTF32_LE, codecs.BOM_UTF32_BE, codecs.BOM_UTF16_LE,
                       codecs.BOM_UTF16_BE)):
        raise _Refused(1, 1, "the file is UTF-16 or UTF-32; save it as UTF-8.")
    body = raw[len(codecs.BOM_UTF8):] if raw.startswith(codecs.BOM_UTF8) else raw
    try:
        return body.decode("utf-8")
    except UnicodeDecodeError as exc:
        before = body[: exc.start].decode("utf-8")
        line = before.count("\n") + 1
        column = len(before) - (before.rfind("\n") + 1) + 1
        message = f"byte 0x{body[exc.start]:02x} is not UTF-8; save the file as UTF-8."
        raise _Refused(line, column, message) from None


def _compose(text: str) -> tuple[yaml.Node | None, list[tuple[int, int, str]]]:
    try:
        loader = _PlanLoader(text)
    except yaml.reader.ReaderError as exc:
        raise _from_reader_error(text, exc) from None
    try:
        try:
            node = loader.get_single_node()
        except yaml.reader.ReaderError as exc:
            raise _from_reader_error(text, exc) from None
        except yaml.composer.ComposerError as exc:
            if exc.problem == "but found another document":
                mark = exc.problem_mark
                raise _Refused(mark.line + 1, mark.column + 1,
                               "a second YAML document starts here; a plan file holds exactly "
                               "one.") from None
            raise _from_marked_error(exc) from None
        except yaml.MarkedYAMLError as exc:
            raise _from_marked_error(exc) from None
        except yaml.YAMLError as exc:  # pragma: no cover - every PyYAML error is marked
            raise _Refused(1, 1, f"the file is not readable YAML: {exc}") from None
        return node, loader.refusals
    finally:
        loader.dispose()


def _from_reader_error(text: str, exc: yaml.reader.ReaderError) -> _Refused:
    before = text[: exc.position]
    line = before.count("\n") + 1
    column = len(before) - (before.rfind("\n") + 1) + 1
    char = exc.character if isinstance(exc.character, str) else chr(exc.character)
    return _Refused(line, column,
                    f"character U+{ord(char):04X} is not allowed in a plan file.")


def _from_marked_error(exc: yaml.MarkedYAMLError) -> _Refused:
    mark = exc.problem_mark or exc.context_mark
    words = [w for w in (exc.context, exc.problem) if w]
    text = "; ".join(words) if words else "not readable YAML"
    line, column = (mark.line + 1, mark.column + 1) if mark is not None else (1, 1)
    return _Refused(line, column, f"YAML syntax: {text}.")


class _Tree:
    """Python data built from nodes, with the position of every key and value."""

    def __init__(self) -> None:
        self.values: dict[Loc, tuple[int, int]] = {}
        self.keys: dict[Loc, tuple[int, int]] = {}
        self.problems: list[tuple[int, int, str, str]] = []

    @staticmethod
    def _pos(node: yaml.Node) -> tuple[int, int]:
        return node.start_mark.line + 1, node.start_mark.column + 1

    def build(self, node: yaml.Node, path: Loc = ()) -> Any:
        self.values[path] = self._pos(node)
        if isinstance(node, yaml.ScalarNode):
            return self._scalar(node, path)
        if isinstance(node, yaml.SequenceNode):
            return [self.build(child, (*path, i)) for i, child in enumerate(node.value)]
        out: dict[str, Any] = {}
        first_seen: dict[str, int] = {}
        for key_node, value_node in node.value:
            if not isinstance(key_node, yaml.ScalarNode):
                line, column = self._pos(key_node)
                self.problems.append((line, column, format_path(path),
                                      "keys must be plain text, not lists or mappings."))
                continue
            key = key_node.value
            line, column = self._pos(key_node)
            if key in first_seen:
                self.problems.append(
                    (line, column, format_path((*path, key)),
                     f"duplicate key '{key}' (first given on line {first_seen[key]}); each "
                     "key may appear once.")
                )
                continue
            first_seen[key] = line
            self.keys[(*path, key)] = (line, column)
            out[key] = self.build(value_node, (*path, key))
        return out

    def _scalar(self, node: yaml.ScalarNode, path: Loc) -> Any:
        text = node.value
        if node.tag == _BOOL:
            return text.lower() == "true"
        if node.tag == _NULL:
            return None
        if node.tag == _INT:
            if len(text) > 100:
                line, column = self._pos(node)
                self.problems.append((line, column, format_path(path),
                                      "a number with more than 100 digits is not allowed."))
                return None
            return int(text)
        if node.tag == _FLOAT:
            if len(text) > 100:
                line, column = self._pos(node)
                self.problems.append((line, column, format_path(path),
                                      "a number with more than 100 digits is not allowed."))
                return None
            special = text.lower().lstrip("+")
            if special in (".inf", "-.inf", ".nan"):
                return float(special.replace(".", ""))
            return float(text)
        return text


# --------------------------------------------------------------------------------------------
# pydantic errors -> located plain sentences


def _unwrap(annotation: Any) -> tuple[Any, str | None]:
    discriminator = None
    while True:
        origin = get_origin(annotation)
        if origin is Annotated:
            args = get_args(annotation)
            annotation = args[0]
            for meta in args[1:]:
                if isinstance(meta, FieldInfo) and meta.discriminator:
                    discriminator = meta.discriminator
            continue
        if origin in (Union, types.UnionType):
            members = [a for a in get_args(annotation) if a is not type(None)]
            if len(members) == 1:
                annotation = members[0]
                continue
        return annotation, discriminator


def _is_model(tp: Any) -> bool:
    return isinstance(tp, type) and issubclass(tp, BaseModel)


def _tags(model: type[BaseModel], discriminator: str) -> tuple[Any, ...]:
    annotation = model.model_fields[discriminator].annotation
    return get_args(annotation) if get_origin(annotation) is Literal else ()


def _walk(loc: tuple[Any, ...]) -> tuple[Loc, type[BaseModel] | None]:
    """Drop union-member segments from a pydantic location.

    Returns the location as a path into the YAML tree and the model class in which its last
    segment was looked up as a key (None when the last segment was not a key).
    """
    annotation: Any = Plan
    discriminator: str | None = None
    clean: list[str | int] = []
    owner: type[BaseModel] | None = None
    i = 0
    while i < len(loc):
        seg = loc[i]
        core, found = _unwrap(annotation)
        discriminator = discriminator or found
        if get_origin(core) in (Union, types.UnionType):
            if discriminator and isinstance(seg, str):
                member = next(
                    (m for m in get_args(core)
                     if _is_model(m) and seg in _tags(m, discriminator)),
                    None,
                )
                if member is not None:
                    annotation, discriminator = member, None
                    i += 1
                    continue
            # a location of our own rules, which carries no member name: any member that has
            # the key will do
            member = next(
                (m for m in get_args(core)
                 if _is_model(m) and isinstance(seg, str) and seg in m.model_fields),
                None,
            )
            if member is not None:
                owner = member
                clean.append(seg)
                fld = member.model_fields[seg]
                annotation, discriminator = fld.annotation, fld.discriminator
                i += 1
                continue
            clean.extend(loc[i:])
            owner = None
            break
        if _is_model(core):
            owner = core
            clean.append(seg)
            fld = core.model_fields.get(seg) if isinstance(seg, str) else None
            if fld is None:
                clean.extend(loc[i + 1:])
                if i + 1 < len(loc):
                    owner = None
                break
            annotation, discriminator = fld.annotation, fld.discriminator
            i += 1
            continue
        origin = get_origin(core)
        if origin in (list, tuple) and isinstance(seg, int):
            clean.append(seg)
            annotation, discriminator = get_args(core)[0], None
            owner = None
            i += 1
            continue
        if origin is dict:
            clean.append(seg)
            annotation, discriminator = get_args(core)[1], None
            owner = None
            i += 1
            continue
        # past the modelled structure: keep keys and indices, drop type names pydantic adds
        clean.extend(s for s in loc[i:] if isinstance(s, int) or "[" not in str(s))
        owner = None
        break
    return tuple(clean), owner


def _show(value: Any) -> str:
    if isinstance(value, str):
        shown = value if len(value) <= 60 else value[:57] + "..."
        return "'" + shown + "'"
    if isinstance(value, bool):
        return "true" if value else "false"
    if value is None:
        return "nothing (null)"
    if isinstance(value, list):
        return "a list"
    if isinstance(value, dict):
        return "a mapping"
    return repr(value)


def _choices(expected: str) -> list[str]:
    return re.findall(r"'([^']*)'", expected) or re.findall(r"[\w.-]+", expected)


def _not_allowed(value: Any, choices: list[str]) -> str:
    hint = suggest(value, choices)
    tail = f" (did you mean '{hint}'?)" if hint else ""
    return f"{_show(value)} is not allowed; use one of {', '.join(choices)}{tail}"


_TYPE_WORDS = {
    "string_type": "expected text",
    "int_type": "expected a whole number",
    "int_from_float": "expected a whole number",
    "int_parsing": "expected a whole number",
    "float_type": "expected a number",
    "float_parsing": "expected a number",
    "bool_type": "expected true or false",
    "bool_parsing": "expected true or false",
    "list_type": "expected a list",
    "tuple_type": "expected a list",
    "dict_type": "expected a mapping of keys to values",
    "model_type": "expected a mapping of keys to values",
    "model_attributes_type": "expected a mapping of keys to values",
    "finite_number": "expected a finite number",
}

_BOUND_WORDS = {
    "greater_than": ("gt", "must be greater than"),
    "greater_than_equal": ("ge", "must be at least"),
    "less_than": ("lt", "must be less than"),
    "less_than_equal": ("le", "must be at most"),
}


def _message(error: Mapping[str, Any], owner: type[BaseModel] | None,
             path: Loc) -> str:
    kind = error["type"]
    ctx = error.get("ctx") or {}
    value = error.get("input")
    if kind == "plan_rule":
        return str(ctx.get("reason", error["msg"]))
    if kind == "literal_error":
        return _not_allowed(value, _choices(str(ctx.get("expected", ""))))
    if kind == "union_tag_invalid":
        return _not_allowed(ctx.get("tag"), _choices(str(ctx.get("expected_tags", ""))))
    if kind == "union_tag_not_found":
        key = str(ctx.get("discriminator", "")).strip("'")
        return f"'{key}' is required here"
    if kind == "extra_forbidden":
        key = path[-1] if path else value
        allowed = list(owner.model_fields) if owner is not None else []
        hint = suggest(str(key), allowed)
        tail = f" (did you mean '{hint}'?)" if hint else ""
        if allowed:
            return f"unknown key '{key}'; use one of {', '.join(allowed)}{tail}"
        return f"unknown key '{key}'"
    if kind == "missing":
        return "this key is required"
    if kind in _TYPE_WORDS:
        words = _TYPE_WORDS[kind]
        if kind == "string_type" and isinstance(value, (bool, int, float)):
            text = ("true" if value else "false") if isinstance(value, bool) else repr(value)
            return f"{words}; got {text} (put it in quotes, '{text}', to use it as text)"
        if kind in ("model_attributes_type", "model_type") and isinstance(value, str):
            return f"{words}, such as 'key: value' lines; got {_show(value)}"
        return f"{words}; got {_show(value)}"
    if kind in _BOUND_WORDS:
        key, words = _BOUND_WORDS[kind]
        return f"{words} {ctx.get(key)}; got {_show(value)}"
    if kind == "too_short":
        if isinstance(value, str):
            return "must not be empty"
        return f"needs at least {ctx.get('min_length')} entries; got {ctx.get('actual_length')}"
    if kind == "too_long":
        return f"allows at most {ctx.get('max_length')} entries; got {ctx.get('actual_length')}"
    msg = str(error.get("msg", "is not valid"))
    return msg[len("Value error, "):] if msg.startswith("Value error, ") else msg


def _sentence(text: str) -> str:
    return " ".join(text.split())


def _translate(error: Mapping[str, Any], tree: _Tree) -> tuple[int, int, str, str]:
    loc = tuple(error["loc"])
    path, owner = _walk(loc)
    kind = error["type"]
    ctx = error.get("ctx") or {}
    position: tuple[int, int] | None = None
    if kind in ("union_tag_invalid", "union_tag_not_found"):
        key = str(ctx.get("discriminator", "")).strip("'")
        position = tree.values.get((*path, key)) or tree.keys.get(path)
        path = (*path, key)
    elif kind == "extra_forbidden":
        position = tree.keys.get(path)
    elif kind == "missing":
        position = tree.keys.get(path[:-1])
    if position is None:
        for n in range(len(path), -1, -1):
            if path[:n] in tree.values:
                position = tree.values[path[:n]]
                break
    line, column = position or (1, 1)
    return line, column, format_path(path), _sentence(_message(error, owner, path))


# --------------------------------------------------------------------------------------------
# public functions


def _fail(source: str, notices: list[PlanNotice]) -> PlanError:
    notices = sorted(notices, key=lambda n: (n.line, n.column, n.path))
    count = len(notices)
    return PlanError(
        f"{source} is not a valid plan ({count} problem{'s' if count != 1 else ''})",
        problems=[str(n) for n in notices],
    )


def load_plan_bytes(raw: bytes, *, path: str | os.PathLike[str] | None = None) -> LoadedPlan:
    """Validate plan text given as bytes; ``path`` is used in messages and for data.file."""
    source = str(path) if path is not None else "<plan>"
    if not isinstance(raw, (bytes, bytearray)):
        raise PlanError(f"{source} is not a valid plan (1 problem)",
                        problems=[f"{source}: plan text must be bytes"])
    raw = bytes(raw)
    try:
        text = _decode(raw)
        root, refusals = _compose(text)
    except _Refused as exc:
        raise _fail(source, [PlanNotice(source, exc.line, exc.column, "", exc.message)]) from None
    notices = [PlanNotice(source, line, column, "", message) for line, column, message in refusals]
    if root is None or (isinstance(root, yaml.ScalarNode) and root.tag == _NULL and not notices):
        raise _fail(source, [PlanNotice(source, 1, 1, "", "the plan is empty.")])
    if not isinstance(root, yaml.MappingNode):
        line, column = root.start_mark.line + 1, root.start_mark.column + 1
        found = "a list" if isinstance(root, yaml.SequenceNode) else "a single value"
        notices.append(PlanNotice(source, line, column, "",
                                  f"a plan must be a mapping of keys to values; found {found}."))
        raise _fail(source, notices)
    tree = _Tree()
    data = tree.build(root)
    notices.extend(PlanNotice(source, *p) for p in tree.problems)
    if notices:
        raise _fail(source, notices)
    try:
        model = Plan.model_validate(data)
    except ValidationError as exc:
        problems = [_translate(e, tree) for e in exc.errors(include_url=False)]
        unique = sorted(set(problems))
        raise _fail(source, [PlanNotice(source, *p) for p in unique]) from None
    warnings = tuple(_locate_warning(source, w, tree) for w in plan_warnings(model))
    return LoadedPlan(
        model=model,
        path=Path(path) if path is not None else None,
        raw=raw,
        fingerprints=fingerprints(model, raw),
        warnings=warnings,
        positions=dict(tree.values),
    )


def _locate_warning(source: str, warning: PlanWarning, tree: _Tree) -> PlanNotice:
    loc = warning.loc
    position = (1, 1)
    for n in range(len(loc), -1, -1):
        if loc[:n] in tree.values:
            position = tree.values[loc[:n]]
            break
    return PlanNotice(source, position[0], position[1], warning.path, warning.message)


def load_plan(path: str | os.PathLike[str]) -> LoadedPlan:
    """Read and validate the plan file at ``path``.

    Returns a :class:`LoadedPlan` (model, path, raw bytes, fingerprints, warnings); raises
    :class:`~planrunner.errors.PlanError` listing every problem found.
    """
    source = os.fspath(path)
    target = Path(source)
    try:
        if target.is_dir():
            raise _Refused(0, 0, "is a folder, not a plan file.")
        with open(target, "rb") as handle:
            raw = handle.read(MAX_PLAN_BYTES + 1)
    except _Refused as exc:
        raise PlanError(f"{source} is not a valid plan (1 problem)",
                        problems=[f"{source}: {exc.message}"]) from None
    except FileNotFoundError:
        raise PlanError(f"{source} was not found",
                        problems=[f"{source}: no such plan file."]) from None
    except (OSError, ValueError) as exc:  # ValueError: e.g. a NUL character in the path
        reason = getattr(exc, "strerror", None) or str(exc) or type(exc).__name__
        raise PlanError(f"{source} could not be read",
                        problems=[f"{source}: cannot be read ({reason})."]) from None
    return load_plan_bytes(raw, path=source)


def validate_plan(path: str | os.PathLike[str]) -> LoadedPlan:
    """What ``planrunner validate`` does for one file: the loaded plan, or PlanError."""
    return load_plan(path)


__all__ = [
    "MAX_DEPTH",
    "MAX_PLAN_BYTES",
    "LoadedPlan",
    "PlanNotice",
    "load_plan",
    "load_plan_bytes",
    "resolve_data_path",
    "validate_plan",
]
