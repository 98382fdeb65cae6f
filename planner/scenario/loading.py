"""Reading scenario files into validated :class:`Scenario` objects.

YAML is read with PyYAML's safe rules only (its C loader where it has one;
``fastyaml`` reads plain files faster with exactly the same result).  Other
forms (spreadsheets, CSV folders) register a reader in ``READERS`` that turns
the file into the same plain dict, so every form meets the same validator.
"""

from __future__ import annotations

import re
from pathlib import Path
from typing import Any, Callable

import yaml

from planner.errors import Problem, ScenarioError
from planner.scenario.fastyaml import fast_read
from planner.scenario.names import character_kind
from planner.scenario.numbers import PLAIN, CommaSplit, Spelled
from planner.scenario.schema import Scenario
from planner.scenario.validate import validate_scenario

#: Largest scenario file read, in bytes (a 10,000-product catalogue is ~15 MB).
MAX_FILE_BYTES = 200 * 1024 * 1024

#: Largest number of values a scenario may expand to (YAML aliases can multiply a small file).
MAX_NODES = 20_000_000

_Base = getattr(yaml, "CSafeLoader", yaml.SafeLoader)


_INT_TAG, _FLOAT_TAG, _NULL_TAG = "tag:yaml.org,2002:int", "tag:yaml.org,2002:float", "tag:yaml.org,2002:null"
_COMMA_TAG = "tag:planner,2026:comma-split"  # a number split by commas inside { }, joined again by the loader
_PIECE = re.compile(r"[-+]?[0-9][0-9_.]*")
_NOT_FINITE = re.compile(r"[-+]?\.(?:inf|Inf|INF)|\.(?:nan|NaN|NAN)")


def _mark(node: Any) -> tuple[int, int]:
    return node.start_mark.line + 1, node.start_mark.column + 1


def _comma_piece(key: Any, value: Any) -> bool:
    """Whether a flow-mapping entry is the tail of a number split at a comma: a plain number key with no value."""
    return (isinstance(key, yaml.ScalarNode) and not key.style and key.tag in (_INT_TAG, _FLOAT_TAG)
            and _PIECE.fullmatch(key.value) is not None and isinstance(value, yaml.ScalarNode)
            and value.tag == _NULL_TAG and value.value == "")


def _join_comma_pieces(pairs: list[tuple[Any, Any]]) -> list[tuple[Any, Any]]:
    """``{capacity: 4,160}`` parses as {capacity: 4, 160: null}: join such tails back onto the number before them."""
    out: list[tuple[Any, Any]] = []
    i = 0
    while i < len(pairs):
        key, value = pairs[i]
        j = i + 1
        if (isinstance(value, yaml.ScalarNode) and not value.style and value.tag in (_INT_TAG, _FLOAT_TAG)
                and _PIECE.fullmatch(value.value)):
            while j < len(pairs) and _comma_piece(*pairs[j]):
                j += 1
        if j > i + 1:
            text = ",".join([value.value] + [k.value for k, _ in pairs[i + 1:j]])
            value = yaml.ScalarNode(_COMMA_TAG, text, value.start_mark, pairs[j - 1][0].end_mark)
        out.append((key, value))
        i = j
    return out


class _Loader(_Base):  # type: ignore[misc, valid-type]
    """The safe loader, noting keys given twice in one mapping (PyYAML silently keeps the last).

    It also keeps what was written where the number rule (planner.scenario.numbers)
    and YAML 1.1 part ways: a plain scalar YAML types as a number but written
    otherwise than in plain decimal (``0400``, ``6:40``, ``0x190``, ``4_00``)
    becomes a :class:`Spelled` value, and a number split by a comma inside
    ``{ }`` a :class:`CommaSplit`; the validator reports each with its line.
    """

    def __init__(self, stream: Any) -> None:
        super().__init__(stream)
        self.duplicates: list[Problem] = []

    def construct_object(self, node: Any, deep: bool = False) -> Any:
        """PyYAML's, with a located error for a value its constructors fail on (``2026-02-30``, ``!!timestamp x``)."""
        try:
            return super().construct_object(node, deep=deep)
        except yaml.YAMLError:
            raise
        except (ValueError, TypeError, AttributeError, KeyError, IndexError, OverflowError):
            kind = {"timestamp": "a date", "set": "a set", "binary": "binary data", "bool": "true or false",
                    "omap": "an ordered mapping", "pairs": "a list of pairs"}.get(str(node.tag).rsplit(":", 1)[-1],
                                                                                  "its type")
            shown = node.value if isinstance(node, yaml.ScalarNode) else "this value"
            raise yaml.constructor.ConstructorError(None, None, f"{shown!r} cannot be read as {kind}",
                                                    node.start_mark) from None

    def construct_mapping(self, node: Any, deep: bool = False) -> Any:
        if not isinstance(node, yaml.MappingNode):
            return super().construct_mapping(node, deep=deep)  # PyYAML's own error: expected a mapping
        if node.flow_style and len(node.value) > 1:
            node.value = _join_comma_pieces(node.value)
        seen: dict[Any, int] = {}
        for key_node, _ in node.value:
            if not isinstance(key_node, yaml.ScalarNode) or key_node.tag == "tag:yaml.org,2002:merge":
                continue
            key = self.construct_object(key_node)
            line = key_node.start_mark.line + 1
            try:
                first = seen.get(key)
            except TypeError:  # an unhashable key: the constructor reports it
                continue
            if first is None:
                seen[key] = line
            else:
                self.duplicates.append(Problem(
                    f"line {line}, column {key_node.start_mark.column + 1}",
                    f"key '{key}' is given twice in the same mapping (first on line {first})",
                    "keep one: otherwise only the last would count"))
        return super().construct_mapping(node, deep=deep)

    def construct_spelled_int(self, node: Any) -> Any:
        try:
            value = self.construct_yaml_int(node)
        except (ValueError, IndexError):  # matched as a number, unreadable: 0x_, 0b_, !!int abc, !!int ""
            return Spelled(node.value, None, *_mark(node))
        return value if PLAIN.fullmatch(node.value) else Spelled(node.value, value, *_mark(node))

    def construct_spelled_float(self, node: Any) -> Any:
        try:
            value = self.construct_yaml_float(node)
        except (ValueError, IndexError):
            return Spelled(node.value, None, *_mark(node))
        if PLAIN.fullmatch(node.value) or _NOT_FINITE.fullmatch(node.value):
            return value  # .inf and .nan: refused as not finite, by the schema
        return Spelled(node.value, value, *_mark(node))

    def construct_comma_split(self, node: Any) -> Any:
        return CommaSplit(node.value, *_mark(node))


_Loader.add_constructor(_INT_TAG, _Loader.construct_spelled_int)
_Loader.add_constructor(_FLOAT_TAG, _Loader.construct_spelled_float)
_Loader.add_constructor(_COMMA_TAG, _Loader.construct_comma_split)


def _yaml_problem(e: yaml.YAMLError, data: bytes) -> Problem:
    """A readable problem for a YAML syntax or encoding error, with line and column."""
    if isinstance(e, yaml.reader.ReaderError):
        ch = e.character if isinstance(e.character, str) else chr(e.character) if isinstance(e.character, int) else ""
        try:
            text = data.decode("utf-8")
        except UnicodeDecodeError:
            text = ""
        if ch and ch in text:  # valid UTF-8 (checked first), so a character YAML does not allow in a file
            at = text.index(ch)
            line, column = text.count("\n", 0, at) + 1, at - (text.rfind("\n", 0, at) + 1) + 1
            return Problem(f"line {line}, column {column}", f"contains {character_kind(ch)} U+{ord(ch):04X}",
                           "remove it: a scenario file holds printable text only")
        pos = int(getattr(e, "position", 0) or 0)
        line = data[:pos].count(b"\n") + 1
        byte = data[pos:pos + 1].hex() if pos < len(data) else "?"
        return Problem(f"line {line}", f"is not UTF-8 text (byte 0x{byte} at position {pos})",
                       "save the file as UTF-8")
    mark = getattr(e, "problem_mark", None)
    where = f"line {mark.line + 1}, column {mark.column + 1}" if mark else ""
    what = str(getattr(e, "problem", None) or e).strip()
    if "nesting depth" in what:  # newer PyYAML builds stop here instead of recursing
        return Problem("", "is nested too deeply to read", "flatten the file")
    if "another document" in what:
        fix = "keep one scenario per file: remove the '---' line and what follows, or split the file"
    elif "constructor for the tag" in what:
        fix = "remove the '!!' tag: scenario files hold plain values only"
    elif "tab" in what:
        fix = "indent with spaces, not tabs"
    elif "cannot be read as" in what:
        fix = "quote it if it is text, or write it in plain form"
    elif "mapping values are not allowed" in what:
        fix = "put a space after each colon, and quote text that contains ': '"
    else:
        fix = "check indentation, colons and brackets"
    return Problem(where, f"is not valid YAML: {what}", fix)


def _not_utf8(data: bytes) -> Problem | None:
    """The first byte that is not UTF-8, located by line and column (UTF-16 with a BOM is accepted)."""
    if data[:2] in (b"\xff\xfe", b"\xfe\xff"):
        return None
    try:
        data.decode("utf-8")
    except UnicodeDecodeError as e:
        line_start = data.rfind(b"\n", 0, e.start) + 1
        line = data.count(b"\n", 0, e.start) + 1
        column = len(data[line_start:e.start].decode("utf-8", errors="replace")) + 1
        return Problem(f"line {line}, column {column}", f"is not UTF-8 text (byte 0x{data[e.start]:02x})",
                       "save the file with UTF-8 encoding")
    return None


def _expanded_size(obj: Any, memo: dict[int, int]) -> int:
    """Number of values ``obj`` stands for once aliases are expanded (linear time, memoised)."""
    if not isinstance(obj, (dict, list)):
        return 1
    key = id(obj)
    if key not in memo:
        memo[key] = 1  # guards against recursive aliases
        items = obj.values() if isinstance(obj, dict) else obj
        memo[key] = 1 + sum(_expanded_size(x, memo) for x in items)
    return memo[key]


def read_yaml_checked(path: Path) -> tuple[Any, list[Problem]]:
    """The raw content of a YAML file and the problems met reading it (keys given twice).

    Errors that leave nothing to validate (unreadable, not UTF-8, bad syntax,
    empty) raise ScenarioError at once.
    """
    try:
        data = path.read_bytes()
    except OSError as e:
        raise ScenarioError([Problem(str(path), f"cannot be read: {e.strerror or e}")]) from None
    bad = _not_utf8(data)
    if bad is not None:
        raise ScenarioError([bad], str(path))
    raw = _fast(data)
    if raw is not None:
        problems: list[Problem] = []
    else:
        raw, problems = _read_pyyaml(data, path)
    if raw is None:
        raise ScenarioError([Problem("", "the file is empty (or holds only comments)",
                                     "start it with 'name:' and 'products:'")], str(path))
    try:
        size = _expanded_size(raw, {})
    except RecursionError:
        raise ScenarioError([Problem("", "is nested too deeply to read", "flatten the file")], str(path)) from None
    if size > MAX_NODES:
        raise ScenarioError([Problem("", f"expands to more than {MAX_NODES:,} values (YAML aliases?)",
                                     "write the scenario out without nested aliases")], str(path))
    return raw, problems


#: Files from this size (bytes) are offered to the fast reader first; PyYAML reads smaller ones in
#: milliseconds, less than compiling the fast reader's whitelist costs.
FAST_FROM_BYTES = 256 * 1024


def _fast(data: bytes) -> Any:
    """The content by the fast reader where it vouches for PyYAML's result, else None."""
    if len(data) < FAST_FROM_BYTES:
        return None
    try:
        text = data.decode("utf-8")
    except UnicodeDecodeError:  # UTF-16 with a byte-order mark: PyYAML's path
        return None
    return fast_read(text)


def _read_pyyaml(data: bytes, path: Path) -> tuple[Any, list[Problem]]:
    """The content by PyYAML's safe loader and the keys given twice; syntax errors raise ScenarioError."""
    loader = _Loader(data)
    try:
        raw = loader.get_single_data()
    except yaml.YAMLError as e:
        raise ScenarioError([_yaml_problem(e, data)], str(path)) from None
    except RecursionError:
        raise ScenarioError([Problem("", "is nested too deeply to read", "flatten the file")], str(path)) from None
    finally:
        loader.dispose()
    return raw, loader.duplicates


def parse_yaml(text: str | bytes) -> Any:
    """YAML text as the planner reads it (PyYAML's safe loader, numbers spelled otherwise kept as written).

    No fast path and no checks: the reference the fast reader is held to (tests/test_fastyaml.py).
    """
    loader = _Loader(text)
    try:
        return loader.get_single_data()
    finally:
        loader.dispose()


def read_yaml(path: Path) -> Any:
    """The raw content of a YAML scenario file (safe loader; errors name the line)."""
    raw, problems = read_yaml_checked(path)
    if problems:
        raise ScenarioError(problems, str(path))
    return raw


#: Readers by file suffix ("/" for a folder): each returns the raw scenario dict or a ReadResult.
READERS: dict[str, Callable[[Path], Any]] = {".yaml": read_yaml, ".yml": read_yaml}


def _check_size(p: Path) -> None:
    if p.stat().st_size > MAX_FILE_BYTES:
        raise ScenarioError([Problem(str(p), f"is larger than {MAX_FILE_BYTES // 2**20} MiB", "split the scenario")])


def _near_files(p: Path) -> str:
    """'did you mean ...?' for a scenario file with a close name in the same folder, or ''."""
    import difflib

    try:
        names = [f.name for f in p.parent.iterdir() if f.suffix.lower() in READERS or f.is_dir()][:10_000]
    except OSError:
        return ""
    close = difflib.get_close_matches(p.name, names, n=1, cutoff=0.75)
    return f"did you mean '{p.parent / close[0]}'?" if close else ""


def read_source(path: str | Path) -> Any:
    """What the path's reader returns: the raw dict, or a ReadResult (raw, locate, problems, base_dir)."""
    p = Path(path)
    if not p.exists():
        raise ScenarioError([Problem(str(p), "no such file or folder", _near_files(p) or "check the path")])
    if p.is_file():
        _check_size(p)
    key = "/" if p.is_dir() else p.suffix.lower()
    reader = READERS.get(key)
    if reader is None and key == "/":
        forms = ", ".join(k for k in sorted(READERS) if k != "/")
        raise ScenarioError([Problem(str(p), "is a folder", f"give a scenario file: {forms}")])
    if reader is None:
        forms = ", ".join(k for k in sorted(READERS) if k != "/")
        raise ScenarioError([Problem(str(p), f"unsupported scenario form '{key}'", f"use one of: {forms}")])
    return reader(p)


def read_raw(path: str | Path) -> Any:
    """The raw scenario dict from any supported form, without validation."""
    got = read_source(path)
    return got.raw if isinstance(got, ReadResult) else got


def load_scenario(path: str | Path) -> tuple[Scenario, list[str]]:
    """Read and validate a scenario file: (scenario, warnings); ScenarioError lists all problems.

    Problems met while reading (YAML keys given twice; cells a spreadsheet
    reader could not use) are reported together with the validator's, in one pass.
    """
    p = Path(path)
    if p.is_file() and READERS.get(p.suffix.lower()) is read_yaml:
        _check_size(p)
        raw, early = read_yaml_checked(p)
        return validate_scenario(raw, source=str(path), base_dir=p.parent, found=early)
    got = read_source(p)
    if isinstance(got, ReadResult):
        return validate_scenario(got.raw, source=str(path), locate=got.locate, base_dir=got.base_dir,
                                 found=got.problems)
    return validate_scenario(got, source=str(path), base_dir=p.parent)


# Spreadsheet forms (planner.io): a workbook, or a folder of CSV tables.
from planner.scenario.forms.csvdir import read_csv_folder  # noqa: E402
from planner.scenario.forms.tables import ReadResult  # noqa: E402
from planner.scenario.forms.xlsx import read_xlsx  # noqa: E402

READERS.update({".xlsx": read_xlsx, "/": read_csv_folder})
