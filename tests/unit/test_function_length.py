"""No function in service/ over MAX_LINES lines, but for a shrinking list of known ones.

A long function interleaving queries with arithmetic should be split into load, compute
(pure) and write steps (DEVELOPERS.md "Long functions"). An exempt entry records the length
the function had when listed: it may shrink, never grow, and goes once the function fits.
The 80-line bound is common practice, the same spirit as ruff's PLR0915 (50 statements).
"""

from __future__ import annotations

import ast
from pathlib import Path

MAX_LINES = 80
SERVICE = Path(__file__).resolve().parents[2] / "service"

# "path relative to service/:function" -> length in lines when listed. Remove on split.
EXEMPT: dict[str, int] = {}


def long_functions(source: str, name: str) -> dict[str, int]:
    """Every function (nested ones too) longer than MAX_LINES lines: "name:function" -> lines."""
    out: dict[str, int] = {}
    for node in ast.walk(ast.parse(source)):
        if isinstance(node, ast.FunctionDef | ast.AsyncFunctionDef):
            assert node.end_lineno is not None
            lines = node.end_lineno - node.lineno + 1
            if lines > MAX_LINES:
                out[f"{name}:{node.name}"] = lines
    return out


def _tree() -> dict[str, int]:
    found: dict[str, int] = {}
    for path in sorted(SERVICE.rglob("*.py")):
        found.update(long_functions(path.read_text(), path.relative_to(SERVICE).as_posix()))
    return found


def test_no_new_long_function() -> None:
    found = _tree()
    new = {k: v for k, v in found.items() if k not in EXEMPT}
    assert not new, f"functions over {MAX_LINES} lines (split them into load/compute/write): {new}"


def test_exempt_functions_only_shrink() -> None:
    found = _tree()
    grown = {k: (EXEMPT[k], v) for k, v in found.items() if k in EXEMPT and v > EXEMPT[k]}
    assert not grown, f"exempt functions grew (listed, now): {grown}"


def test_exempt_list_has_no_stale_entry() -> None:
    found = _tree()
    stale = sorted(set(EXEMPT) - set(found))
    assert not stale, f"these now fit in {MAX_LINES} lines or are gone; drop them: {stale}"


def test_a_long_function_is_caught() -> None:
    body = "\n".join(f"    x{i} = {i}" for i in range(MAX_LINES))
    src = f"def short():\n    return 1\n\n\ndef long():\n{body}\n"
    assert long_functions(src, "m.py") == {"m.py:long": MAX_LINES + 1}
