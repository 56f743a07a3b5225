"""The command line's shape: a package, one module per command, named exit codes, a quick ``--help``.

References: Python's ``importlib.metadata`` (the installed version), ``argparse``
(ArgumentTypeError for argument types), ``difflib.get_close_matches`` (the close
option). The rest is this project's own rule.
"""

from __future__ import annotations

import argparse
import ast
import json
import os
import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parent.parent
CLI = ROOT / "app" / "cli"


def _python(code: str, *args: str) -> subprocess.CompletedProcess:
    env = dict(os.environ, PYTHONPATH=str(ROOT))
    return subprocess.run(
        [sys.executable, "-c", code, *args], capture_output=True, text=True, cwd=ROOT, env=env, timeout=120
    )


HEAVY = ("pandas", "sklearn", "scipy", "dash", "plotly", "numpy", "fitting", "pyarrow")
MODULES_AFTER = (
    "import sys, json\n"
    "from app.cli import main\n"
    "code = main(sys.argv[1:])\n"
    "heavy = sorted({m.split('.')[0] for m in sys.modules} & set(%r))\n"
    "sys.stderr.write(json.dumps(heavy))\n"
    "sys.exit(code)\n" % (HEAVY,)
)


@pytest.mark.parametrize("argv", [("--help",), ("fit", "--help"), ("sweep", "--help"), ("--version",)])
def test_help_and_version_import_no_engine_and_no_pandas(argv):
    proc = _python(MODULES_AFTER, *argv)
    assert proc.returncode == 0, proc.stderr
    assert json.loads(proc.stderr.strip().splitlines()[-1]) == []
    assert proc.stdout.strip()


def test_size_limit_default_is_the_engines():
    import fitting
    from app.cli import _args

    assert _args.DEFAULT_SIZE_LIMIT_MB * _args.MIB == fitting.DEFAULT_MAX_BYTES


def test_named_exit_codes():
    import app.cli as cli

    assert (cli.EXIT_OK, cli.EXIT_INTERNAL, cli.EXIT_USAGE, cli.EXIT_INTERRUPTED) == (0, 1, 2, 130)
    assert cli.main(["fit", "no/such/file.csv", "--degree", "1"]) == cli.EXIT_USAGE
    assert cli.main(["--help"]) == cli.EXIT_OK


def test_the_entry_point_is_app_cli_main():
    text = (ROOT / "pyproject.toml").read_text()
    assert 'degreescope = "app.cli:main"' in text
    from app.cli import main

    assert callable(main)


def test_one_module_per_command_each_adds_its_own_subparser():
    from app.cli import build_parser, fit, predict, serve, sweep

    sub = next(a for a in build_parser()._actions if isinstance(a, argparse._SubParsersAction))
    assert sorted(sub.choices) == ["fit", "predict", "serve", "sweep"]
    for module in (fit, predict, serve, sweep):
        assert callable(module.add_parser) and callable(module.run)
        assert sub.choices[module.__name__.rsplit(".", 1)[1]].get_default("func") is module.run


def test_int_at_least():
    from app.cli._args import _int_at_least

    at_least_2 = _int_at_least(2)
    assert at_least_2("2") == 2 and at_least_2("40") == 40
    for bad in ("1", "-3", "two", "2.5"):
        with pytest.raises(argparse.ArgumentTypeError):
            at_least_2(bad)


def test_the_command_line_imports_only_public_engine_names():
    offenders = []
    for path in sorted(CLI.glob("*.py")):
        for node in ast.walk(ast.parse(path.read_text())):
            if isinstance(node, ast.ImportFrom) and node.module and node.module.startswith("fitting."):
                offenders.append((path.name, node.module))
            named = isinstance(node, ast.Attribute) and isinstance(node.value, ast.Name)
            if named and node.value.id == "fitting" and node.attr.startswith("_"):
                offenders.append((path.name, node.attr))
    assert offenders == []


def test_no_not_in_this_build_branches_remain():
    for path in sorted(CLI.glob("*.py")) + [ROOT / "tests" / "test_cli.py"]:
        assert "not in this build" not in path.read_text(), path.name
        assert "not available in this build" not in path.read_text(), path.name


def test_suggestion_names_the_close_option_and_command():
    from app.cli import build_parser
    from app.cli._args import suggestion

    parser = build_parser()
    assert "did you mean --degree?" in suggestion(parser, ["fit", "a.csv", "--degee", "2"])
    assert "did you mean --max-degree?" in suggestion(parser, ["sweep", "a.csv", "--max-degre=3"])
    assert "did you mean sweep?" in suggestion(parser, ["swep", "a.csv"])
    assert suggestion(parser, ["fit", "a.csv", "--zzzzzz"]) is None  # nothing close: argparse's own message stays
    assert suggestion(parser, ["predict", "m.json", "--at", "-5", "--levl", "0.9"]).endswith(
        "did you mean --level? (see `degreescope predict --help`)"
    )
