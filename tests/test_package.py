"""The package as a whole: docstring examples run, the import stays light, every SQL
function and command is documented."""

from __future__ import annotations

import doctest
import importlib
import pkgutil
import re
import subprocess
import sys
from pathlib import Path

import pytest

import tidesplit

README = Path(__file__).resolve().parents[1] / "README.md"
# every module, the kernel's and the examples' included (the prefix makes walk_packages
# import subpackages by their full names, whatever the working directory holds)
MODULES = sorted(
    {"tidesplit"}
    | {
        info.name
        for info in pkgutil.walk_packages(tidesplit.__path__, prefix="tidesplit.")
        if not info.name.rsplit(".", 1)[-1].startswith("_")
    }
)


@pytest.mark.parametrize("name", MODULES)
def test_docstring_examples(name):
    module = importlib.import_module(name)
    failures, _ = doctest.testmod(module, optionflags=doctest.ELLIPSIS)
    assert failures == 0


def test_public_functions_have_examples():
    for name in tidesplit.__all__:
        obj = getattr(tidesplit, name)
        assert obj.__doc__, name
        if callable(obj) and not isinstance(obj, type):
            assert ">>>" in obj.__doc__, f"{name} has no example"


def test_import_is_light():
    code = (
        "import sys, tidesplit; "
        "print(sorted(m for m in ('duckdb', 'pandas', 'pyarrow', 'numba', 'llvmlite', "
        "'statsmodels', 'scipy', 'matplotlib', 'pyspark') "
        "if m in sys.modules))"
    )
    loaded = subprocess.run(
        [sys.executable, "-c", code], capture_output=True, text=True, check=True
    ).stdout.strip()
    assert loaded == "[]"


def sql_functions(con) -> set[str]:
    rows = con.sql(
        "SELECT DISTINCT function_name FROM duckdb_functions() "
        "WHERE function_name LIKE 'tide\\_%' ESCAPE '\\'"
    ).fetchall()
    return {r[0] for r in rows}


def test_every_sql_function_is_documented(con):
    names = sql_functions(con)
    assert {"tide_split", "tide_split_list"} <= names
    text = README.read_text()
    for name in names:
        assert re.search(rf"`{name}\(", text), f"{name} missing from README"


def test_every_command_has_help_and_docs():
    from tidesplit import cli

    text = README.read_text()
    for command in cli.COMMANDS:
        result = subprocess.run(
            [sys.executable, "-m", "tidesplit.cli", command, "--help"],
            capture_output=True,
            text=True,
            check=True,
        )
        assert "usage" in result.stdout
        assert f"tidesplit {command}" in text


def test_readme_argument_table_is_the_registry():
    # README's table is written from the registry (python -m tidesplit.arguments)
    from tidesplit import arguments

    assert arguments.markdown_table() in README.read_text()


@pytest.mark.parametrize(
    "columns",
    ["SPLIT_COLUMNS", "PROFILE_COLUMNS", "OUTLIERS_COLUMNS", "FORECAST_COLUMNS", "AUDIT_COLUMNS"],
)
def test_readme_column_tables_are_the_answers(columns):
    # README's column tables are written from answers.py (answers.markdown_table)
    from tidesplit import answers

    assert answers.markdown_table(getattr(answers, columns)) in README.read_text()


def test_shipped_sql_is_written_from_the_registry():
    # sql/tidesplit.sql is plain SQL, written by python -m tidesplit.sql_build
    from tidesplit import sql_build

    shipped = Path(__file__).resolve().parents[1] / "sql" / "tidesplit.sql"
    assert shipped.read_text() == sql_build.render()


def test_python_signatures_are_the_registry():
    import inspect

    from tidesplit import arguments

    for function, name in (
        ("split", "split_table"),
        ("profile", "profile"),
        ("outliers", "outliers"),
        ("forecast", "forecast"),
    ):
        parameters = inspect.signature(getattr(tidesplit, name)).parameters
        for argument in arguments.of(function):
            assert parameters[argument.name].default == argument.default_in(function), (
                name,
                argument.name,
            )
