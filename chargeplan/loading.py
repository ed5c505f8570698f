"""Reading input files safely, and turning validation errors into one-line messages.

Every user file is read through :func:`read_input` (a regular file only, opened without
blocking, its size capped). YAML is first walked event by event (depth and expanded size
capped, before anything is built), then read with ruamel.yaml's safe loader, which refuses
tags that would build Python objects (``!!python/object`` and friends). JSON is read with the
standard library, refusing ``NaN``, ``Infinity``, duplicate keys and half surrogate pairs.
Every failure is an :class:`~chargeplan.errors.InputError` naming the file, the field and the
fix.
"""

from __future__ import annotations

import contextlib
import difflib
import errno
import json
import os
import re
import stat
from pathlib import Path
from typing import Any, TypeVar

from pydantic import BaseModel, ValidationError

from chargeplan.errors import InputError

__all__ = ["MAX_INPUT_BYTES", "MAX_YAML_DEPTH", "MAX_YAML_NODES", "input_error", "not_a_file",
           "read_input", "read_mapping", "validate"]

M = TypeVar("M", bound=BaseModel)

#: The largest input file read, in bytes. Battery and profile files are a few kB.
MAX_INPUT_BYTES = 5 * 1024 * 1024
#: The deepest nesting of lists and mappings a YAML file may hold (input files need about 5).
MAX_YAML_DEPTH = 64
#: The most values (scalars, lists, mappings) a YAML file may stand for once every alias and
#: merge key is expanded: "billion laughs" files stand for billions in a few hundred bytes.
MAX_YAML_NODES = 1_000_000


def _reject_constant(name: str) -> Any:
    raise ValueError(f"{name} is not a number chargeplan accepts")


def _no_duplicate_keys(pairs: list[tuple[str, Any]]) -> dict[str, Any]:
    result: dict[str, Any] = {}
    for key, value in pairs:
        if key in result:
            raise ValueError(f"the key '{key}' appears twice in one object")
        result[key] = value
    return result


_NOT_A_FILE = (
    (stat.S_ISDIR, "a folder"),
    (stat.S_ISFIFO, "a FIFO (named pipe)"),
    (stat.S_ISCHR, "a device"),
    (stat.S_ISBLK, "a device"),
    (stat.S_ISSOCK, "a socket"),
)


def not_a_file(mode: int) -> str:
    """What a file of this ``st_mode`` is when it is not a regular file ("a FIFO (named pipe)",
    "a device", ...), or "" when it is one."""
    if stat.S_ISREG(mode):
        return ""
    return next((name for test, name in _NOT_A_FILE if test(mode)), "not a regular file")


def _cannot_open(error: OSError, shown: str, what: str) -> InputError:
    if isinstance(error, FileNotFoundError):
        return InputError("no such file", file=shown, fix="check the path")
    if error.errno == errno.ENXIO:  # a socket (or a device without its driver): never opened
        with contextlib.suppress(OSError):
            kind = not_a_file(os.stat(shown).st_mode)  # only to name it; nothing is read
            if kind:
                return InputError(f"is {kind}, not a file", file=shown, fix=f"give the {what} file")
    return InputError(f"cannot read it ({error.strerror})", file=shown,
                      fix="check the path and its permissions")


def read_input(path: str | Path, *, what: str = "input", limit: int = MAX_INPUT_BYTES) -> bytes:
    """The bytes of an input file: every file chargeplan reads from a user comes through here.

    The file is opened without blocking (``O_NONBLOCK``, so a FIFO with no writer opens at
    once, and ``O_NOCTTY``) and its descriptor, not its path, is checked: anything but a
    regular file (a FIFO, a device, a socket, a folder) is refused, so nothing can swap the
    file between the check and the read. The size is capped from ``fstat`` before reading,
    and the read itself stops at ``limit + 1`` bytes, so a file that grows (or lies about its
    size) cannot exhaust memory.
    """
    shown = str(path)
    flags = os.O_RDONLY | getattr(os, "O_NONBLOCK", 0) | getattr(os, "O_NOCTTY", 0)
    try:
        fd = os.open(path, flags | getattr(os, "O_CLOEXEC", 0))
    except OSError as error:
        raise _cannot_open(error, shown, what) from None
    try:
        info = os.fstat(fd)
        kind = not_a_file(info.st_mode)
        if kind:
            raise InputError(f"is {kind}, not a file", file=shown, fix=f"give the {what} file")
        if info.st_size > limit:
            raise _too_large(f"{info.st_size / 1e6:.1f} MB", limit, shown, what)
        chunks: list[bytes] = []
        left = limit + 1
        while left > 0:
            chunk = os.read(fd, min(left, 1 << 20))
            if not chunk:
                break
            chunks.append(chunk)
            left -= len(chunk)
        if left <= 0:  # it grew while being read
            raise _too_large(f"more than {limit / 1e6:.1f} MB", limit, shown, what)
        return b"".join(chunks)
    except OSError as error:
        raise InputError(f"cannot read it ({error.strerror})", file=shown,
                         fix="check the path and its permissions") from None
    finally:
        os.close(fd)


def _too_large(size: str, limit: int, shown: str, what: str) -> InputError:
    return InputError(
        f"is {size}, larger than any {what} file should be "
        f"({limit / (1024 * 1024):g} MB at most)",
        file=shown,
        fix=f"check that this is the {what} file",
    )


def read_mapping(path: str | Path, *, what: str = "input") -> dict[str, Any]:
    """Read a YAML or JSON file whose top level is a mapping."""
    path = Path(path)
    shown = str(path)
    raw = read_input(path, what=what)
    try:
        text = raw.decode("utf-8-sig")
    except UnicodeDecodeError:
        raise InputError("is not UTF-8 text", file=shown,
                         fix=f"give a YAML or JSON {what} file") from None
    if "\x00" in text:
        raise InputError("is binary, not text", file=shown,
                         fix=f"give a YAML or JSON {what} file")
    if not text.strip():
        raise InputError("is empty", file=shown, fix=f"write the {what} in YAML or JSON")
    if path.suffix.lower() == ".json":
        data = parse_json(text, shown)
    else:
        data = _parse_yaml(text, shown)
    if data is None:  # only comments or blank lines
        raise InputError("holds no keys, only comments or blank lines", file=shown,
                         fix=f"write the {what} in YAML or JSON")
    if not isinstance(data, dict):
        raise InputError(
            f"the top level is a {type(data).__name__}, not a mapping of keys",
            file=shown,
            fix=f"start the {what} file with its sections, e.g. 'battery:'",
        )
    return data


_SURROGATE_ESCAPE = re.compile(r"\\u[dD][89a-fA-F][0-9a-fA-F]{2}")


def parse_json(text: str, shown: str) -> Any:
    """Strict JSON: a duplicate key, NaN or Infinity is refused, with the line and column."""
    try:
        data = json.loads(text, parse_constant=_reject_constant,
                          object_pairs_hook=_no_duplicate_keys)
        if _SURROGATE_ESCAPE.search(text):  # a pair is one character; half of one is no text
            json.dumps(data, ensure_ascii=False).encode("utf-8")
        return data
    except UnicodeEncodeError:
        raise InputError("holds a \\u escape for half of a UTF-16 surrogate pair, which is "
                         "not a character", file=shown,
                         fix="write the character itself, or both halves of the pair") from None
    except json.JSONDecodeError as error:
        raise InputError(
            f"line {error.lineno}, column {error.colno}: not valid JSON ({error.msg})",
            file=shown,
            fix="fix the JSON syntax there",
        ) from None
    except ValueError as error:
        raise InputError(
            str(error), file=shown, fix="write each key once, and numbers as finite values"
        ) from None
    except RecursionError:
        raise InputError("is nested too deeply", file=shown, fix="flatten the file") from None


#: The numbers YAML may build, as the strict reader writes them (chargeplan.units): a
#: decimal integer without a leading zero, a decimal float, .inf and .nan (which the fields
#: refuse by name). YAML 1.2 (section 10.3.2, the core schema) also resolves 0o6, 0x6 and,
#: in ruamel.yaml, 1_2 as integers, and YAML 1.1 012 as octal and 1:30 as 90: those stay
#: text, and a number field's reader refuses them with the fix.
_NUMBER_TAGS = {
    "tag:yaml.org,2002:int": re.compile(r"[-+]?(?:0|[1-9][0-9]*)", re.ASCII),
    "tag:yaml.org,2002:float": re.compile(
        r"[-+]?(?:[0-9]+(?:\.[0-9]*)?|\.[0-9]+)(?:[eE][-+]?[0-9]+)?"
        r"|[-+]?\.(?:inf|Inf|INF)|\.(?:nan|NaN|NAN)", re.ASCII),
}


def _resolver() -> type:
    """ruamel.yaml's resolver, looking up its table once per file.

    ``VersionedResolver.resolve`` asks the parser for the document's YAML version on every
    plain scalar (slow behind the C parser) and extends a cached resolver list in place
    (``resolvers += ...``). This resolves the same tags from the table looked up once and
    from copies of its lists: a profile file loads 3x faster (1.5 ms instead of 4.4 ms).
    """
    from ruamel.yaml.nodes import ScalarNode
    from ruamel.yaml.resolver import VersionedResolver
    from ruamel.yaml.tag import Tag

    class Resolver(VersionedResolver):  # type: ignore[misc]
        _table: Any = None

        def resolve(self, kind: Any, value: Any, implicit: Any) -> Any:
            if kind is ScalarNode and implicit[0]:
                # the table for the document's YAML version, looked up once per file
                table = self._table = self._table or self.versioned_resolver
                first = table.get(value[0] if value else "", [])
                for tag, regexp in [*first, *table.get(None, [])]:
                    if regexp.match(value):
                        if tag == "tag:yaml.org,2002:timestamp":
                            break  # dates stay text: the model reads them and names the field
                        if tag in _NUMBER_TAGS and not _NUMBER_TAGS[tag].fullmatch(value):
                            break  # 0x6, 1_2, 012, 1:30 stay text: the strict reader refuses
                        return Tag(suffix=tag)
                implicit = (False, implicit[1])
            return super().resolve(kind, value, implicit)

    return Resolver


def _refuse_yaml(event: Any, shown: str, problem: str, fix: str) -> InputError:
    mark = getattr(event, "start_mark", None)
    where = f"line {mark.line + 1}: " if mark is not None else ""
    return InputError(f"{where}{problem}", file=shown, fix=fix)


def _events(text: str) -> Any:
    """The parser's events one by one (ruamel's C parser where installed: it keeps its own
    stack, so no depth of input exhausts the interpreter's)."""
    try:
        from ruamel.yaml import CParser
    except ImportError:  # the pure-Python parser, also iterative
        from ruamel.yaml import YAML

        yield from YAML(typ="safe", pure=True).parse(text)
        return
    parser = CParser(text)
    try:
        get = parser.get_event
        while True:
            event = get()
            yield event
            if event.__class__.__name__ == "StreamEndEvent":
                return
    finally:
        parser.dispose()


def _check_events(text: str, shown: str) -> None:
    """Walk the parser's events, before anything is composed or built, and refuse a file
    nested deeper than MAX_YAML_DEPTH or standing for more than MAX_YAML_NODES values.

    An alias counts as the whole of what its anchor stands for (its values and its height),
    so a merge key's alias counts too, and the count is never below what any loader builds.
    """
    from ruamel.yaml import events

    opening = (events.SequenceStartEvent, events.MappingStartEvent)
    closing = (events.SequenceEndEvent, events.MappingEndEvent)
    alias, scalar = events.AliasEvent, events.ScalarEvent
    anchors: dict[str, tuple[int, int]] = {}  # anchor: (values, height)
    stack: list[list[Any]] = []  # each open collection: [values, height of its content, anchor]
    total = 0
    for event in _events(text):
        kind = type(event)
        if kind is scalar:
            size, height = 1, 0
            if event.anchor:
                anchors[event.anchor] = (1, 0)
        elif kind in opening:
            stack.append([1, 0, event.anchor])
            total += 1
            if len(stack) > MAX_YAML_DEPTH:
                raise _too_deep(event, shown)
            continue
        elif kind in closing:
            size, height, anchor = stack.pop()
            height += 1
            total -= size  # counted already, value by value
            if anchor:
                anchors[anchor] = (size, height)
        elif kind is alias:
            size, height = anchors.get(event.anchor, (1, 0))  # an unknown one: the loader says
        else:
            continue
        total += size
        if stack:
            parent = stack[-1]
            parent[0] += size
            if height > parent[1]:
                parent[1] = height
        if len(stack) + height > MAX_YAML_DEPTH:
            raise _too_deep(event, shown)
        if total > MAX_YAML_NODES:
            raise _refuse_yaml(event, shown, f"stands for more than {MAX_YAML_NODES:,} values "
                               "once its aliases (*) and merge keys (<<) are expanded",
                               "write the values out, without aliases that multiply")


def _too_deep(event: Any, shown: str) -> InputError:
    return _refuse_yaml(event, shown, f"is nested more than {MAX_YAML_DEPTH} deep",
                        "flatten the file: input files need only a few levels")


def _parse_yaml(text: str, shown: str) -> Any:
    from ruamel.yaml import YAML
    from ruamel.yaml.error import MarkedYAMLError, YAMLError

    yaml = YAML(typ="safe")  # the C parser where installed; never builds objects
    yaml.Resolver = _resolver()
    try:
        _check_events(text, shown)
        return yaml.load(text)
    except MarkedYAMLError as error:
        mark = error.problem_mark or error.context_mark
        where = f"line {mark.line + 1}, column {mark.column + 1}: " if mark else ""
        problem = (error.problem or error.context or "not valid YAML").strip()
        if "could not determine a constructor" in problem or "tag" in problem:
            raise InputError(
                f"{where}YAML tags that build objects are refused ({problem})",
                file=shown,
                fix="remove the '!!' tag and write plain values",
            ) from None
        raise InputError(f"{where}{problem}", file=shown, fix="fix the YAML syntax there") from None
    except YAMLError as error:
        raise InputError(f"not valid YAML ({str(error).splitlines()[0]})", file=shown,
                         fix="fix the YAML syntax") from None
    except RecursionError:
        raise InputError("is nested too deeply", file=shown, fix="flatten the file") from None


def _location(loc: tuple[int | str, ...]) -> str:
    """The field's dotted path; a key longer than a message quotes is cut short."""
    from chargeplan.units import quote

    text = ""
    for part in loc:
        if isinstance(part, int):
            text += f"[{part}]"
        else:
            text += f".{quote(part)}" if text else quote(part)
    return text


def _known_keys(model: type[BaseModel], loc: tuple[int | str, ...]) -> list[str]:
    """The file keys allowed at ``loc``'s parent, for spelling suggestions."""
    current: Any = model
    for part in loc[:-1]:
        is_model = isinstance(current, type) and issubclass(current, BaseModel)
        if isinstance(part, int) or not is_model:
            return []
        field = next(
            (f for name, f in current.model_fields.items() if (f.alias or name) == part), None
        )
        if field is None:
            return []
        annotation = field.annotation
        candidates = [annotation, *getattr(annotation, "__args__", ())]
        current = next(
            (c for c in candidates if isinstance(c, type) and issubclass(c, BaseModel)), None
        )
    if isinstance(current, type) and issubclass(current, BaseModel):
        return [f.alias or name for name, f in current.model_fields.items()]
    return []


def input_error(error: ValidationError, *, file: str, model: type[BaseModel]) -> InputError:
    """The first problem of a validation error as one line; the count of the rest."""
    problems = error.errors(include_url=False)
    # a misspelt key also shows up as the missing key it was meant to be: name the spelling
    problems.sort(key=lambda p: p["type"] != "extra_forbidden")
    first = problems[0]
    loc = tuple(first["loc"])
    field = _location(loc) or None
    kind = first["type"]
    message = str(first["msg"]).removeprefix("Value error, ").removeprefix("Assertion failed, ")
    fix: str | None
    from chargeplan.units import QUOTE_MAX, QuantityError

    cause = first.get("ctx", {}).get("error")
    if isinstance(cause, QuantityError):  # the reader's own problem and fix
        message, fix = cause.problem, cause.fix
    elif kind == "missing":
        message, fix = "is missing", f"add {field}" + _example_hint(field)
    elif kind == "extra_forbidden":
        known = _known_keys(model, loc)
        close = difflib.get_close_matches(str(loc[-1])[:QUOTE_MAX], known, n=1)
        message = "is not a known field"
        fix = f"did you mean '{close[0]}'?" if close else "remove it or check its spelling"
        if str(loc[-1])[:1].isdigit():  # {min: -18,5 degC} reads as min: -18 and "5 degC"
            fix = ("a decimal comma inside { } splits the value in two; write a decimal "
                   "point (1.5, not 1,5)")
        elif known and not close:
            fix += f" (known here: {', '.join(known)})"
    elif "; " in message:
        message, fix = message.split("; ", 1)
    else:
        fix = _FIXES.get(kind, "correct the value")
        if kind in ("less_than_equal", "greater_than_equal", "less_than", "greater_than"):
            limit = first.get("ctx", {})
            bound = next(iter(limit.values()), None) if limit else None
            fix = f"use a value {_BOUND_WORDS[kind]} {bound}" if bound is not None else fix
    more = len(problems) - 1
    if more:
        fix = f"{fix} (and {more} more problem{'s' if more > 1 else ''} after this)"
    return InputError(message, file=file, field=field, fix=fix)


_FIXES = {
    "int_type": "write a whole number, e.g. 6",
    "int_from_float": "write a whole number, e.g. 6",
    "int_parsing": "write a whole number, e.g. 6",
    "bool_type": "write true or false",
    "bool_parsing": "write true or false",
    "float_type": "write a number",
    "float_parsing": "write a number",
    "finite_number": "write a finite number",
    "string_type": "write it as text (in quotes if it looks like a number)",
    "dict_type": "write a mapping of keys under it",
    "model_type": "write a mapping of keys under it",
    "list_type": "write a list",
    "literal_error": "use one of the values named",
    "enum": "use one of the values named",
}
_BOUND_WORDS = {
    "less_than_equal": "of at most",
    "less_than": "below",
    "greater_than_equal": "of at least",
    "greater_than": "above",
}

_EXAMPLES = {
    "capacity": "capacity: 24 Ah",
    "chemistry": "chemistry: agm",
    "name": "name: Mower battery, bay 3",
    "battery_temperature": "battery_temperature: 20 degC",
    "conditions": "conditions: {battery_temperature: 20 degC}",
    "battery": "battery: {name: ..., chemistry: agm, nominal_voltage: 12 V, capacity: 24 Ah}",
    "duration": "duration: 120 d",
    "max_voltage": "max_voltage: 16 V",
    "max_current": "max_current: 4 A",
}


def _example_hint(field: str | None) -> str:
    if not field:
        return ""
    example = _EXAMPLES.get(field.rsplit(".", 1)[-1])
    return f", e.g. '{example}'" if example else ""


def validate(model: type[M], data: dict[str, Any], *, file: str) -> M:
    """Validate ``data`` as ``model``; a failure is an InputError naming file and field."""
    try:
        return model.model_validate(data)
    except ValidationError as error:
        raise input_error(error, file=file, model=model) from None
