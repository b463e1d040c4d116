"""Find (and with --apply, rename) calib's internal helper names: give them a leading underscore.

A top-level function, class or constant of a module under calib/ is internal when its name
appears nowhere else: not in another module of calib/, nor in tests/, bench/, sample_runs/,
README.md, pyproject.toml or the web templates (a whole-word search, strings and docstrings
included, so a name any other file mentions is left alone).  Package ``__init__.py`` files, the
public face, are not touched, nor are the modules in :data:`PUBLIC_MODULES`, nor is a name in the annotations of a public function, method or
class field (its objects leave the module).  A name is renamed only where that is mechanical:
the module never uses it as an attribute, a parameter, a keyword argument or an import, and
``_NAME`` is free.

Within the module every whole-word occurrence is renamed (code, docstrings, doctests,
comments); the name leaves the module's ``__all__``.

    python -m tests.private_names            # list the candidates
    python -m tests.private_names --apply    # rename them

``tests/test_private_names.py`` fails while there is any candidate, so a helper added later
is either used elsewhere or given its underscore.
"""

from __future__ import annotations

import argparse
import ast
import io
import re
import sys
import tokenize
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
PACKAGE = ROOT / "calib"
ELSEWHERE = ("calib", "tests", "bench", "sample_runs", "README.md", "pyproject.toml", ".ci")
#: Modules that are a public face as a whole (documented in README and their docstrings).
PUBLIC_MODULES = {"calib/service.py", "calib/service_trend.py", "calib/cli/exits.py",
                  "calib/verdict_words.py", "calib/errors.py", "calib/options.py"}
TEXT_SUFFIXES = {".py", ".md", ".toml", ".html", ".txt", ".cfg", ".json", ".js", ".css", ""}


def _top_level_names(tree: ast.Module) -> list[str]:
    names: list[str] = []
    for node in tree.body:
        if isinstance(node, (ast.FunctionDef, ast.AsyncFunctionDef, ast.ClassDef)):
            names.append(node.name)
        elif isinstance(node, (ast.Assign, ast.AnnAssign)):
            targets = node.targets if isinstance(node, ast.Assign) else [node.target]
            for target in targets:
                for sub in ast.walk(target):
                    if isinstance(sub, ast.Name):
                        names.append(sub.id)
    return [n for n in dict.fromkeys(names)
            if not n.startswith("_") and n not in ("main",)]


def _in_public_signatures(tree: ast.Module) -> set[str]:
    """Names in the annotations of public functions, methods and class fields (they escape)."""
    out: set[str] = set()

    def names_in(node: ast.AST | None) -> None:
        if node is None:
            return
        for sub in ast.walk(node):
            if isinstance(sub, ast.Name):
                out.add(sub.id)
            elif isinstance(sub, ast.Constant) and isinstance(sub.value, str):
                out.update(re.findall(r"[A-Za-z_][A-Za-z0-9_]*", sub.value))

    def function(node: ast.FunctionDef | ast.AsyncFunctionDef) -> None:
        if node.name.startswith("_") and not node.name.startswith("__"):
            return
        for arg in [*node.args.posonlyargs, *node.args.args, *node.args.kwonlyargs,
                    node.args.vararg, node.args.kwarg]:
            if arg is not None:
                names_in(arg.annotation)
        names_in(node.returns)

    for node in tree.body:
        if isinstance(node, (ast.FunctionDef, ast.AsyncFunctionDef)):
            function(node)
        elif isinstance(node, ast.ClassDef) and not node.name.startswith("_"):
            for item in node.body:
                if isinstance(item, (ast.FunctionDef, ast.AsyncFunctionDef)):
                    function(item)
                elif isinstance(item, ast.AnnAssign):
                    names_in(item.annotation)
    return out


def _unsafe(tree: ast.Module, name: str) -> bool:
    """Whether ``name`` is also an attribute, parameter, keyword, import or global here."""
    for node in ast.walk(tree):
        if (isinstance(node, ast.Attribute) and node.attr == name
                or isinstance(node, ast.arg) and node.arg == name
                or isinstance(node, ast.keyword) and node.arg == name
                or isinstance(node, ast.alias) and (node.asname or node.name) == name
                or isinstance(node, (ast.Global, ast.Nonlocal)) and name in node.names):
            return True
        if (isinstance(node, (ast.FunctionDef, ast.AsyncFunctionDef, ast.ClassDef))
                and node not in tree.body and node.name == name):
            return True
    return False


def candidates() -> dict[Path, list[str]]:
    """Module → its names that nothing outside it mentions and that rename mechanically."""
    everything = {p: p.read_text(encoding="utf-8") for p in sorted(PACKAGE.rglob("*.py"))}
    words: dict[str, set[Path]] = {}
    for top in ELSEWHERE:
        base = ROOT / top
        paths = [base] if base.is_file() else sorted(base.rglob("*")) if base.is_dir() else []
        for path in paths:
            if (path.is_file() and path.suffix in TEXT_SUFFIXES
                    and "__pycache__" not in path.parts):
                text = path.read_text(encoding="utf-8", errors="replace")
                for word in set(re.findall(r"[A-Za-z_][A-Za-z0-9_]*", text)):
                    words.setdefault(word, set()).add(path)
    out: dict[Path, list[str]] = {}
    for path, text in everything.items():
        if (path.name in ("__init__.py", "__main__.py")
                or path.relative_to(ROOT).as_posix() in PUBLIC_MODULES):
            continue
        tree = ast.parse(text)
        taken = {n.id for n in ast.walk(tree) if isinstance(n, ast.Name)}
        escaping = _in_public_signatures(tree)
        names = [n for n in _top_level_names(tree)
                 if words.get(n, set()) <= {path} and n not in escaping and not _unsafe(tree, n)
                 and f"_{n}" not in taken and f"_{n}" not in words]
        if names:
            out[path] = names
    return out


def rename(text: str, names: list[str]) -> str:
    """``text`` with each of ``names`` given a leading underscore and dropped from ``__all__``."""
    tree = ast.parse(text)
    for node in tree.body:
        if (isinstance(node, ast.Assign) and any(isinstance(t, ast.Name) and t.id == "__all__"
                                                 for t in node.targets)
                and isinstance(node.value, (ast.List, ast.Tuple))):
            keep = [e for e in node.value.elts
                    if not (isinstance(e, ast.Constant) and e.value in names)]
            if len(keep) != len(node.value.elts):
                lines = text.splitlines(keepends=True)
                start = sum(len(line) for line in lines[:node.lineno - 1]) + node.col_offset
                end = sum(len(line) for line in lines[:node.end_lineno - 1]) + node.end_col_offset
                body = ", ".join(repr(e.value).replace("'", '"') for e in keep
                                 if isinstance(e, ast.Constant))
                new = _wrap(f"__all__ = [{body}]")
                text = text[:start] + new + text[end:]
            break
    pattern = re.compile(r"(?<![A-Za-z0-9_])(" + "|".join(map(re.escape, names))
                         + r")(?![A-Za-z0-9_])")
    tokens = list(tokenize.generate_tokens(io.StringIO(text).readline))
    lines = text.splitlines(keepends=True)
    offsets = [0]
    for line in lines:
        offsets.append(offsets[-1] + len(line))
    edits = []
    for tok in tokens:
        if tok.type in (tokenize.NAME, tokenize.STRING, tokenize.COMMENT):
            start = offsets[tok.start[0] - 1] + tok.start[1]
            end = offsets[tok.end[0] - 1] + tok.end[1]
            new = pattern.sub(r"_\1", tok.string)
            if new != tok.string:
                edits.append((start, end, new))
    for start, end, new in reversed(edits):
        text = text[:start] + new + text[end:]
    return text


def _wrap(line: str, width: int = 100) -> str:
    if len(line) <= width:
        return line
    head, items = line.split("[", 1)
    items = items.rstrip("]")
    out, current = [], head + "["
    indent = " " * len(current)
    for item in items.split(", "):
        piece = item + ", "
        if len(current) + len(piece.rstrip()) > width:
            out.append(current.rstrip())
            current = indent
        current += piece
    out.append(current.rstrip().rstrip(",") + "]")
    return "\n".join(out)


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--apply", action="store_true", help="rename them in place")
    args = parser.parse_args(argv)
    found = candidates()
    for path, names in found.items():
        print(f"{path.relative_to(ROOT)}: {', '.join(names)}")
        if args.apply:
            path.write_text(rename(path.read_text(encoding="utf-8"), names), encoding="utf-8")
    print(f"{sum(map(len, found.values()))} names in {len(found)} modules", file=sys.stderr)
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
