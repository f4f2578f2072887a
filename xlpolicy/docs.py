"""Documentation generated from the code, so it cannot drift from what the code does.

    python -m xlpolicy.docs        # rewrites every generated block and page under docs/

Three kinds of generated text:

- tables of the workbook contract (Items columns, Settings rows, Price breaks columns) in
  blocks of docs/workbook.md between ``<!-- generated:NAME -->`` and ``<!-- end:NAME -->``;
- docs/cli-reference.md, the ``--help`` of every command;
- docs/problems.md, every problem code the package can report, with its severity and the
  message as the code writes it, found by reading the package's own source.

A test checks each committed file equals what this module writes.
"""

from __future__ import annotations

import ast
import re
import sys
from collections.abc import Callable
from pathlib import Path

from .contract import ITEM_COLUMNS, PERIODS_PER_YEAR, PRICE_BREAK_COLUMNS, READ_SETTINGS, Column


def _cell(text: str) -> str:
    return text.replace("|", "\\|")


def _aliases(col: Column, n: int = 3) -> str:
    return ", ".join(col.aliases[:n])


def items_table() -> str:
    """Markdown table of the Items columns: header as the template writes it, rule, aliases."""
    rows = [
        "| column | required | what goes in it | also recognised as |",
        "| --- | --- | --- | --- |",
    ]
    for col in ITEM_COLUMNS:
        rows.append(
            f"| {col.title} | {col.required} | {_cell(col.meaning)} | {_cell(_aliases(col))} |"
        )
    return "\n".join(rows)


def settings_table() -> str:
    """Markdown table of the Settings rows with their defaults."""
    rows = ["| setting | default | meaning |", "| --- | --- | --- |"]
    for s in READ_SETTINGS:
        if s.key == "periods_per_year":
            default = " / ".join(f"{int(v)}" for v in PERIODS_PER_YEAR.values())
        else:
            default = "(none)" if s.default is None else str(s.default)
        rows.append(f"| {s.title} | {default} | {_cell(s.meaning)} |")
    return "\n".join(rows)


def price_breaks_table() -> str:
    """Markdown table of the optional Price breaks sheet's columns."""
    rows = ["| column | what goes in it | also recognised as |", "| --- | --- | --- |"]
    for col in PRICE_BREAK_COLUMNS:
        rows.append(f"| {col.title} | {_cell(col.meaning)} | {_cell(_aliases(col))} |")
    return "\n".join(rows)


BLOCKS = {
    "items-columns": items_table,
    "settings": settings_table,
    "price-break-columns": price_breaks_table,
}


def _filler(make: Callable[[], str]) -> Callable[[re.Match[str]], str]:
    """What replaces one block: its opening line, ``make()``'s content, its closing line."""
    return lambda m: m.group(1) + make() + "\n" + m.group(2)


def render(text: str) -> str:
    """``text`` with every generated block replaced by its current content."""
    for name, make in BLOCKS.items():
        pattern = re.compile(rf"(<!-- generated:{name} -->\n).*?(<!-- end:{name} -->)", re.DOTALL)
        text, n = pattern.subn(_filler(make), text)
        if n != 1:
            raise ValueError(f"block {name!r} found {n} times")
    return text


HELP_WIDTH = 96


def cli_reference() -> str:
    """docs/cli-reference.md: the ``--help`` text of the group and of every command."""
    import click

    from .cli import main as group

    def context(cmd: click.Command, name: str, parent: click.Context | None) -> click.Context:
        # the command's own context settings (the group's -h alias among them), as click
        # applies them when it runs the command; a bare Context would leave them out
        return click.Context(
            cmd,
            info_name=name,
            parent=parent,
            terminal_width=HELP_WIDTH,
            max_content_width=HELP_WIDTH,
            **cmd.context_settings,
        )

    def help_of(cmd: click.Command, name: str, parent: click.Context | None) -> str:
        return cmd.get_help(context(cmd, name, parent))

    top = context(group, "xlpolicy", None)
    parts = [
        "# Command reference",
        "",
        "Every command's `--help`, as the installed program prints it. This page is generated",
        "by `python -m xlpolicy.docs`; a test fails when it differs from the code.",
        "",
        "## xlpolicy",
        "",
        "```text",
        group.get_help(top),
        "```",
    ]
    assert isinstance(group, click.Group)
    for name in sorted(group.commands):
        cmd = group.commands[name]
        if cmd.hidden:
            continue
        parts += ["", f"## xlpolicy {name}", "", "```text", help_of(cmd, name, top), "```"]
    return "\n".join(parts) + "\n"


_SEVERITIES = ("fatal", "error", "warning", "info")


def _text_of(node: ast.AST | None) -> str:
    """The literal text of a message expression, with each computed part shown as '…'."""
    if node is None:
        return ""
    if isinstance(node, ast.Constant) and isinstance(node.value, str):
        return node.value
    if isinstance(node, ast.JoinedStr):
        return "".join(_text_of(v) if isinstance(v, ast.Constant) else "…" for v in node.values)
    if isinstance(node, ast.BinOp) and isinstance(node.op, ast.Add):
        return _text_of(node.left) + _text_of(node.right)
    return "…"


def _code_of(node: ast.AST) -> str | None:
    """A problem code as written: a literal, or an f-string family shown with '<…>'."""
    if isinstance(node, ast.Constant) and isinstance(node.value, str):
        return node.value
    if isinstance(node, ast.JoinedStr):
        return "".join(str(v.value) if isinstance(v, ast.Constant) else "<…>" for v in node.values)
    return None


def _problem_call(node: ast.Call) -> tuple[str, str, ast.AST | None] | None:
    """(code, severity, message) of a call that reports a problem, or None.

    Three shapes report one: a log method with ``code=`` (``log.warning(msg, code=...)``,
    ``log.add(Severity.X, msg, code=...)``, or a dict of those keywords); the planner's
    ``note(mask, code, severity, text)``; and the guard's ``Refused(message, code)``, which
    the reader turns into a fatal problem.
    """
    func = node.func
    name = func.attr if isinstance(func, ast.Attribute) else getattr(func, "id", "")
    args = node.args
    if name == "note" and len(args) == 4:
        code, severity = _code_of(args[1]), _code_of(args[2])
        text = args[3].body if isinstance(args[3], ast.Lambda) else args[3]
        return (code, severity or "varies", text) if code else None
    if name == "Refused" and len(args) == 2:
        code = _code_of(args[1])
        return (code, "fatal", args[0]) if code else None
    kw = {k.arg: k.value for k in node.keywords if k.arg}
    code = _code_of(kw["code"]) if "code" in kw else None
    if code is None:
        return None
    message = kw.get("message")
    if message is None and args:
        message = args[1] if name == "add" and len(args) > 1 else args[0]
    severity = name if name in _SEVERITIES else "varies"
    if name == "add" and args:
        first = ast.unparse(args[0])
        severity = next((s for s in _SEVERITIES if s.upper() in first), "varies")
    return code, severity, message


def problem_codes(root: Path | None = None) -> dict[str, dict[str, set[str]]]:
    """Every problem code in the package's source: its severities, modules and messages."""
    root = root or Path(__file__).resolve().parent
    found: dict[str, dict[str, set[str]]] = {}
    for path in sorted(root.rglob("*.py")):
        tree = ast.parse(path.read_text(encoding="utf-8"))
        for node in ast.walk(tree):
            if not isinstance(node, ast.Call):
                continue
            found_here = _problem_call(node)
            if found_here is None:
                continue
            code, severity, message = found_here
            entry = found.setdefault(code, {"severity": set(), "module": set(), "message": set()})
            entry["severity"].add(severity)
            entry["module"].add(path.relative_to(root.parent).as_posix())
            text = " ".join(_text_of(message).split())
            if text and text != "…":
                entry["message"].add(text)
    return found


def problem_catalogue() -> str:
    """docs/problems.md: one row per problem code."""
    rows = [
        "# Problem catalogue",
        "",
        "Every problem xlpolicy can report, by its code (the Warnings sheet and the JSON",
        "output carry the code). `…` stands for a part filled in at run time: a cell's value, a",
        "column's name, a count. Severities: *fatal*, the file cannot be used and nothing is",
        "written; *error*, the row or item is skipped; *warning*, the item is planned but a",
        "number may not be trustworthy; *info*, worth knowing. This page is generated from the",
        "source by `python -m xlpolicy.docs`; a test fails when it differs.",
        "",
        "| code | severity | message | raised in |",
        "| --- | --- | --- | --- |",
    ]
    order = {s: i for i, s in enumerate(_SEVERITIES + ("varies",))}
    for code, entry in sorted(problem_codes().items()):
        sev = ", ".join(sorted(entry["severity"], key=order.__getitem__))
        msg = (
            "<br>".join(_cell(m) for m in sorted(entry["message"])) or "(message built at run time)"
        )
        mods = ", ".join(f"`{m}`" for m in sorted(entry["module"]))
        rows.append(f"| `{_cell(code)}` | {sev} | {msg} | {mods} |")
    return "\n".join(rows) + "\n"


DOCS = Path("docs")
PAGES = {"cli-reference.md": cli_reference, "problems.md": problem_catalogue}
BLOCK_FILES = ("workbook.md",)


def expected(docs: Path = DOCS) -> dict[Path, str]:
    """Each generated file's path and the text it should hold now."""
    out = {docs / name: make() for name, make in PAGES.items()}
    for name in BLOCK_FILES:
        out[docs / name] = render((docs / name).read_text(encoding="utf-8"))
    return out


def main(argv: list[str] | None = None) -> int:
    """Rewrite the generated blocks and pages under docs/ (or the folder given)."""
    args = sys.argv[1:] if argv is None else argv
    docs = Path(args[0]) if args else DOCS
    for path, text in expected(docs).items():
        path.write_text(text, encoding="utf-8")
        print(f"updated {path}")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
