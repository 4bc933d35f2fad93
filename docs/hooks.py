"""MkDocs hooks: pages made at build time.

- ``reference/case-keys.md``: every key of the case file, generated from the JSON Schema that the
  package ships (:mod:`elastofe.case.json_schema`), so the reference cannot drift from the loader
  (tests/test_schema.py keeps the schema and the loader's keys equal).
- ``examples/NAME.md`` for each ``examples/NAME.ipynb``: the notebook executed (nbclient, kernel
  ``python3``, working folder ``docs/examples``) and rendered as Markdown with its outputs. Set
  ``ELASTOFE_DOCS_EXECUTE=0`` to render them without running (a quick look at the pages).
"""
from __future__ import annotations

import os
import posixpath
import sys
from pathlib import Path

from mkdocs.structure.files import File

HERE = Path(__file__).resolve().parent
if str(HERE.parent) not in sys.path:  # document the checkout the pages belong to
    sys.path.insert(0, str(HERE.parent))


def _type(node: dict) -> str:
    if "enum" in node:
        return " \\| ".join(f"`{v!r}`" if not isinstance(v, str) else f'`"{v}"`' for v in node["enum"])
    if "anyOf" in node:
        return " or ".join(_type(a) for a in node["anyOf"])
    t = node.get("type")
    if t == "array":
        items = node.get("items", {})
        n = node.get("minItems")
        size = f"{n}" if n is not None and n == node.get("maxItems") else ""
        return f"list of {size + ' ' if size else ''}{_type(items) if isinstance(items, dict) else 'values'}"
    if t == "object":
        return "table"
    if isinstance(t, list):
        return " or ".join(t)
    return t or "value"


def _rows(node: dict, path: str, out: list[str], sections: list[tuple[str, dict]]) -> None:
    req = set(node.get("required", []))
    for key, sub in node.get("properties", {}).items():
        obj = sub if "properties" in sub else next((a for a in sub.get("anyOf", []) if "properties" in a), None)
        arr = next((a for a in sub.get("anyOf", []) if a.get("type") == "array" and "properties" in a.get("items", {})),
                   None) or (sub if sub.get("type") == "array" and "properties" in sub.get("items", {}) else None)
        desc = sub.get("description", "")
        where = f"{path}.{key}" if path else key
        if arr is not None:
            sections.append((f"[[{where}]]", arr["items"]))
            kind = "array of tables"
        elif obj is not None:
            sections.append((f"[{where}]", obj))
            kind = "table"
        elif isinstance(sub.get("additionalProperties"), dict):  # a table of named entries (regions)
            sections.append((f"[{where}]", sub))
            kind = "table"
        else:
            kind = _type(sub)
        out.append(f"| `{key}` | {'yes' if key in req else ''} | {kind} | {desc} |")


def case_keys_markdown() -> str:
    """The case-file key reference as Markdown, from the shipped JSON Schema."""
    from elastofe.case.json_schema import case_schema

    schema = case_schema()
    lines = ["# Case file keys", "",
             "Every key the case loader accepts, generated from the JSON Schema shipped with the package "
             "(`elastofe schema` prints it). Quantities are numbers in the case's unit system "
             "(`units`) or strings with a unit such as `\"200 GPa\"`. The schema checks keys and shapes; "
             "`elastofe check CASE.toml` also checks values, units and the geometry.", ""]
    queue: list[tuple[str, dict]] = [("(top level)", schema)]
    while queue:
        title, node = queue.pop(0)
        rows: list[str] = []
        found: list[tuple[str, dict]] = []
        base = title.strip("[]") if title != "(top level)" else ""
        _rows(node, base, rows, found)
        if title == "(top level)":
            lines += ["## Top level", ""]
        else:
            lines += [f"## `{title}`", ""]
        if node.get("description"):
            lines += [node["description"], ""]
        if rows:
            lines += ["| key | required | type | meaning |", "|---|---|---|---|", *rows, ""]
        extra = node.get("additionalProperties")
        if isinstance(extra, dict) and "properties" in extra:  # the named regions: name = { selector }
            lines += ["Any name as the key; its value is a table with exactly one selector:", ""]
            queue.append((f"[{base}.NAME]", extra))
        queue.extend(found)
    return "\n".join(lines) + "\n"


def _notebook_markdown(path: Path, execute: bool) -> tuple[str, dict]:
    import nbformat
    from nbconvert import MarkdownExporter

    nb = nbformat.read(path, as_version=4)
    if execute:
        from nbclient import NotebookClient

        NotebookClient(nb, timeout=600, kernel_name="python3",
                       resources={"metadata": {"path": str(path.parent)}}).execute()
    body, resources = MarkdownExporter().from_notebook_node(nb, resources={"output_files_dir": f"{path.stem}_files"})
    note = (f"\n\n---\n[Download the notebook]({path.name}) · "
            + ("executed when these pages were built\n" if execute else "shown without running it\n"))
    return body + note, resources.get("outputs", {})


def on_files(files, config):
    files.append(File.generated(config, "reference/case-keys.md", content=case_keys_markdown()))
    execute = os.environ.get("ELASTOFE_DOCS_EXECUTE", "1") != "0"
    for nb in sorted((HERE / "examples").glob("*.ipynb")):
        text, outputs = _notebook_markdown(nb, execute)
        files.append(File.generated(config, f"examples/{nb.stem}.md", content=text))
        for name, data in outputs.items():
            files.append(File.generated(config, posixpath.join("examples", name), content=data))
    return files
