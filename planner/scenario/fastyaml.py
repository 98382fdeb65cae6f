"""A fast first reading of YAML scenario files: exact, or declined.

Scenario files are read with PyYAML's safe rules (YAML 1.1: ``yes`` is true,
``010`` is eight, ``1e3`` is text).  PyYAML needs about 4 s for a
10,000-product catalogue even with its C parser, because every value is
built in Python.  ``yaml-rs`` (a Rust parser) reads the same file in a
tenth of a second, but by YAML 1.2 rules, which type some plain values
differently.  :func:`fast_read` uses it only where the answer provably
equals PyYAML's and returns ``None`` otherwise, so the caller falls back to
PyYAML (which also gives the located error messages):

- before parsing, the text must match a whitelist of plain block style,
  line by line (below): no document markers, directives, tags, anchors,
  complex or merge keys, block scalars or continuation lines, and numbers
  only as plain decimals, which both rule sets read alike;
- after parsing, every text value and key is checked against PyYAML's own
  implicit resolvers: text that PyYAML would read as a boolean, number,
  null or date (``yes``, ``1:30``, ``2026-03-31``) declines the fast path,
  and so does any key that is not a plain scalar;
- any parse error, including a key given twice, declines it too.

Both checks are conservative: a decline costs only time.  The differential
tests in ``tests/test_fastyaml.py`` hold the fast path to PyYAML's result and
to the planner's own loader (:func:`planner.scenario.loading.parse_yaml`),
which keeps numbers spelled otherwise than in plain decimal (``0400``,
``6:40``, ``4_00``, ``{a: 4,160}``) as written: no such scalar passes the
whitelist, so the two always agree on what the fast path takes.
"""

from __future__ import annotations

import functools
import re
from typing import Any

import yaml

try:  # an optional accelerator: without it every file takes PyYAML's path
    import yaml_rs
except ImportError:  # pragma: no cover - exercised only where the wheel is missing
    yaml_rs = None

# The fast path takes only files written in a plain block style, line by line:
# ``key: value``, ``- key: value``, ``- value``, ``key:`` (a block follows) and
# comments, where a key or text value is a quote without escapes or a plain
# word that starts with a letter, and a number is a decimal integer or a
# decimal with a dot (and a signed exponent).  One-line flow lists and
# mappings of such items are allowed too.  Anything else (tabs, block
# scalars, anchors, tags, directives, continuation lines, dates, numbers
# written any other way) declines it.
_CHAR = r"[\x20-\x7e\xa0-\u2027\u202a-\ud7ff\ue000-\ufefe\uff00-\ufffd\U00010000-\U0010ffff]"  # printable
_WORD = r"[^\W\d_][\w .\-/()+%'&,]*"           # block context: may hold spaces and commas
_FLOW_WORD = r"[^\W\d_](?:[\w.\-/()+%'&]| (?! *[,\]}]))*"  # flow context: no commas or brackets
_QUOTE = r"(?:\"(?:(?![\"\\])" + _CHAR + r")*\"|'(?:(?!')" + _CHAR + r")*')"
_NUMBER = r"-?(?:0|[1-9][0-9]*)(?:\.[0-9]*(?:[eE][-+][0-9]+)?)?"
_FLOW_SCALAR = rf"(?:{_NUMBER}|{_FLOW_WORD}|{_QUOTE})"
_FLOW_KEY = rf"(?:{_FLOW_WORD}|{_QUOTE})"
_FLOW = (rf"(?:\[ *(?:{_FLOW_SCALAR}(?: *, *{_FLOW_SCALAR})* *)?\]"
         rf"|\{{ *(?:{_FLOW_KEY}: +{_FLOW_SCALAR}(?: *, *{_FLOW_KEY}: +{_FLOW_SCALAR})* *)?\}})")
_VALUE = rf"(?:{_NUMBER}|{_WORD}|{_QUOTE}|{_FLOW})"
_KEY = rf"(?:{_WORD}|{_QUOTE})"
_COMMENT = rf"(?: +#{_CHAR}*)?"
_LINE = (rf"(?: *(?:(?:- )*{_KEY}:(?: +{_VALUE})?|(?:- )+{_VALUE}|(?:- )*-)?{_COMMENT}"
         rf"| *#{_CHAR}*)")
_PLAIN_BLOCK_PATTERN = rf"(?:{_LINE}\r?\n)*{_LINE}"


@functools.cache
def _plain_block() -> re.Pattern[str]:
    """The whitelist, compiled on first use (about 0.1 s: not paid at start-up)."""
    return re.compile(_PLAIN_BLOCK_PATTERN)


_RESOLVERS = yaml.SafeLoader.yaml_implicit_resolvers
_STR_TAG = "tag:yaml.org,2002:str"
_PLAIN_KEYS = (str, int, float, bool, type(None))


def _typed_by_pyyaml(text: str) -> bool:
    """Whether PyYAML would read ``text``, written plain, as something other than text."""
    for tag, regexp in _RESOLVERS.get(text[:1], ()):
        if tag != _STR_TAG and regexp.match(text):
            return True
    return False


def _agrees(obj: Any, seen: dict[str, bool]) -> bool:
    """Whether every text and key in ``obj`` reads the same under both rule sets."""
    stack = [obj]
    while stack:
        x = stack.pop()
        if isinstance(x, str):
            risky = seen.get(x)
            if risky is None:
                risky = seen[x] = _typed_by_pyyaml(x)
            if risky:
                return False
        elif isinstance(x, dict):
            for k in x:
                if not isinstance(k, _PLAIN_KEYS):
                    return False
            stack.extend(x)
            stack.extend(x.values())
        elif isinstance(x, list):
            stack.extend(x)
        elif not isinstance(x, (int, float, type(None))):  # bool is an int
            return False
    return True


def fast_read(text: str) -> Any | None:
    """The content of YAML ``text`` exactly as PyYAML's safe loader reads it, or None if not vouched for."""
    if yaml_rs is None or _plain_block().fullmatch(text) is None:
        return None
    try:
        raw = yaml_rs.loads(text, parse_datetime=False,
                            duplicate_key_policy=yaml_rs.DuplicateKeyPolicy.Error)
    except Exception:  # any refusal (syntax, duplicate keys, alias limits): PyYAML reports it
        return None
    return raw if _agrees(raw, {}) else None
