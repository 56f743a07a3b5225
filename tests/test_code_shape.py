"""The shape the contributor guide promises: short functions in the product code.

Common practice, no source: a function that does not fit on one screen is hard to review.
The limit (60 code lines, docstrings, comments and blank lines not counted) is this
project's own rule; ruff's C901 (max-complexity 15, pyproject.toml) covers branching.
"""

from __future__ import annotations

import ast
import io
import tokenize
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
MAX_CODE_LINES = 60


def _code_lines(source: str) -> set[int]:
    """Line numbers that hold code: not blank, not only a comment, not part of a docstring."""
    lines: set[int] = set()
    for tok in tokenize.generate_tokens(io.StringIO(source).readline):
        if tok.type in (tokenize.COMMENT, tokenize.NL, tokenize.NEWLINE, tokenize.INDENT, tokenize.DEDENT):
            continue
        if tok.type == tokenize.ENDMARKER:
            continue
        lines.update(range(tok.start[0], tok.end[0] + 1))
    tree = ast.parse(source)
    for node in ast.walk(tree):
        if isinstance(node, (ast.FunctionDef, ast.AsyncFunctionDef, ast.ClassDef, ast.Module)):
            first = node.body[0] if node.body else None
            if (
                isinstance(first, ast.Expr)
                and isinstance(first.value, ast.Constant)
                and isinstance(first.value.value, str)
            ):
                lines.difference_update(range(first.lineno, first.end_lineno + 1))
    return lines


def long_functions(paths) -> list[tuple[str, str, int]]:
    """(file, function, code lines) for every function over the limit, nested ones counted on their own."""
    found = []
    for path in paths:
        source = path.read_text(encoding="utf-8")
        code = _code_lines(source)
        tree = ast.parse(source)
        for node in ast.walk(tree):
            if not isinstance(node, (ast.FunctionDef, ast.AsyncFunctionDef)):
                continue
            own = set(range(node.lineno, node.end_lineno + 1))
            for inner in ast.walk(node):
                if inner is not node and isinstance(inner, (ast.FunctionDef, ast.AsyncFunctionDef)):
                    own.difference_update(range(inner.lineno, inner.end_lineno + 1))
            n = len(own & code)
            if n > MAX_CODE_LINES:
                found.append((str(path.relative_to(ROOT)), node.name, n))
    return found


def product_files():
    return sorted(p for d in ("app", "fitting") for p in (ROOT / d).rglob("*.py"))


def test_no_function_in_the_product_code_runs_over_60_code_lines():
    assert long_functions(product_files()) == []


def test_the_counter_counts_code_and_not_docstrings(tmp_path):
    body = "\n".join(f"    x{i} = {i}" for i in range(61))
    f = tmp_path / "m.py"
    f.write_text(f'def long():\n    """Doc.\n\n    More doc.\n    """\n    # a comment\n\n{body}\n', encoding="utf-8")
    g = tmp_path / "n.py"
    g.write_text('def short():\n    """' + "\n" * 100 + '"""\n    return 1\n', encoding="utf-8")
    global ROOT
    old, ROOT = ROOT, tmp_path
    try:
        assert long_functions([f]) == [("m.py", "long", 62)]
        assert long_functions([g]) == []
    finally:
        ROOT = old
