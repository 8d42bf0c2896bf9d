"""Every message a user can see is in the error catalogue (docs/errors.md).

The messages are found in the source rather than listed by hand: each ``raise`` of the
project's errors (src/tidesplit/errors.py), each reason written into a series' status, each
note added to an ``ok``, each reason gathered for a refusal, and each ``error(...)`` of the
SQL macros. A message's family is its longest piece of fixed text (the parts between the
placeholders); the catalogue must hold that text word for word.
"""

from __future__ import annotations

import ast
import re
from pathlib import Path

import tidesplit.errors

ROOT = Path(__file__).parent.parent
SOURCE = ROOT / "src" / "tidesplit"
CATALOGUE = ROOT / "docs" / "errors.md"
ERRORS = {
    name
    for name, value in vars(tidesplit.errors).items()
    if isinstance(value, type) and issubclass(value, Exception)
}
# calls whose text argument becomes a message: with_note(status, note), notes.append(note),
# reasons.append(reason)
CARRIERS = {"with_note": 1, "append": 0}


def _pieces(node: ast.AST) -> list[str] | None:
    """The fixed pieces of a message expression, or None when it is not text at all."""
    if isinstance(node, ast.Constant) and isinstance(node.value, str):
        return [node.value]
    if isinstance(node, ast.JoinedStr):
        return [v.value for v in node.values if isinstance(v, ast.Constant)] or [""]
    if isinstance(node, ast.BinOp) and isinstance(node.op, ast.Add):
        left, right = _pieces(node.left), _pieces(node.right)
        if left is None or right is None:
            return None
        return [*left[:-1], left[-1] + right[0], *right[1:]]
    return None


def family(pieces: list[str]) -> str:
    return max((p.strip(" ;:,()") for p in pieces), key=len)


def _status_target(target: ast.AST) -> bool:
    return isinstance(target, ast.Subscript) and "status" in ast.unparse(target.value)


def messages() -> dict[str, str]:
    """Family -> where it is raised or written (file:line), for every message found."""
    found: dict[str, str] = {}
    for path in sorted(SOURCE.rglob("*.py")):
        tree = ast.parse(path.read_text())
        for node in ast.walk(tree):
            candidates: list[ast.AST] = []
            if isinstance(node, ast.Raise) and isinstance(node.exc, ast.Call):
                func = node.exc.func
                name = func.id if isinstance(func, ast.Name) else getattr(func, "attr", "")
                if name in ERRORS and node.exc.args:
                    candidates.append(node.exc.args[0])
            elif isinstance(node, ast.Assign) and any(map(_status_target, node.targets)):
                candidates.append(node.value)
            elif isinstance(node, ast.Call):
                func = node.func
                name = func.id if isinstance(func, ast.Name) else getattr(func, "attr", "")
                owner = ast.unparse(func.value) if isinstance(func, ast.Attribute) else ""
                if name == "append" and owner not in ("reasons", "notes"):
                    continue
                at = CARRIERS.get(name)
                if at is not None and len(node.args) > at:
                    candidates.append(node.args[at])
            elif isinstance(node, ast.FunctionDef) and node.name == "_cannot_follow":
                candidates += [r.value for r in ast.walk(node) if isinstance(r, ast.Return)]
            for candidate in candidates:
                pieces = _pieces(candidate) if candidate is not None else None
                if pieces is None:
                    continue  # a message made elsewhere (a status, joined reasons): found there
                text = family(pieces)
                if len(text) >= 4:
                    found.setdefault(text, f"{path.name}:{node.lineno}")
    sql = (ROOT / "sql" / "tidesplit.sql").read_text()
    # error('...') and the fixed text joined to a message with ||
    literals = re.findall(r"error\('((?:[^']|'')*)'", sql)
    literals += re.findall(r"'((?:[^']|'')+)'\s*\|\|", sql)
    literals += re.findall(r"\|\|\s*'((?:[^']|'')+)'", sql)
    for literal in literals:
        text = literal.replace("''", "'").strip(' ;:,()".')
        if len(text) >= 8 and " " in text:
            found.setdefault(text, "sql/tidesplit.sql")
    return found


def test_every_message_family_is_in_the_catalogue():
    catalogue = CATALOGUE.read_text()
    found = messages()
    assert len(found) > 100  # the walk sees the messages (raises, statuses, notes, SQL)
    missing = {text: where for text, where in found.items() if text not in catalogue}
    assert not missing, "not in docs/errors.md:\n" + "\n".join(
        f"{where}: {text}" for text, where in sorted(missing.items(), key=lambda i: i[1])
    )


def test_the_catalogue_says_what_each_means_and_what_to_do():
    # every entry is a table row of three cells: the message, its meaning, what to do
    rows = [
        line
        for line in CATALOGUE.read_text().splitlines()
        if line.startswith("| `") and not line.startswith("| ---")
    ]
    assert len(rows) > 60
    for row in rows:
        cells = [c.strip() for c in row.strip("|").split(" | ")]
        assert len(cells) == 3 and all(cells), row
