"""The verification table as text, JSON and one self-contained HTML page."""
from __future__ import annotations

import html
import json
import math
from dataclasses import asdict
from pathlib import Path

CAUTION = ("Verification shows that this installation reproduces published benchmark values within "
           "the stated tolerances. elastofe performs linear-elastic, small-displacement analysis; a "
           "verified solver is no substitute for the judgement of a licensed engineer or for the "
           "governing codes and standards.")


def _num(v: float) -> str:
    if v is None or (isinstance(v, float) and not math.isfinite(v)):
        return "-"
    return f"{v:.5g}"


def _err(r) -> str:
    if r.absolute:
        return f"{r.error:+.2e}"
    return f"{r.error:+.2%}" if abs(r.error) >= 1e-4 or r.error == 0 else f"{r.error:+.1e} rel"


def _tol(r) -> str:
    if r.absolute:
        return f"±{r.tolerance:.2g}"
    return f"±{r.tolerance:.1%}" if r.tolerance >= 1e-3 else f"±{r.tolerance:.0e} rel"


COLUMNS = ("case", "quantity", "target", "result", "error", "tolerance", "verdict", "source")


def table_rows(report) -> list[tuple[str, ...]]:
    def with_unit(v, r):
        return _num(v) + (f" {r.unit}" if r.unit and _num(v) != "-" else "")

    def in_unit(text, r):  # an absolute error or tolerance is in the quantity's unit
        return text + (f" {r.unit}" if r.absolute and r.unit else "")

    return [(r.benchmark, r.quantity, with_unit(r.target, r), with_unit(r.result, r), in_unit(_err(r), r),
             in_unit(_tol(r), r), r.verdict, r.source) for r in report.rows]


def format_table(report, source_width: int = 48) -> str:
    """The table as fixed-width text (source cut to ``source_width`` characters)."""
    rows = [tuple(c if i != 7 or len(c) <= source_width else c[:source_width - 1] + "…"
                  for i, c in enumerate(r)) for r in table_rows(report)]
    w = [max(len(COLUMNS[i]), *(len(r[i]) for r in rows)) if rows else len(COLUMNS[i]) for i in range(8)]
    line = "  ".join(f"{c:<{w[i]}}" for i, c in enumerate(COLUMNS))
    out = [line, "-" * len(line)]
    out += ["  ".join(f"{c:<{w[i]}}" for i, c in enumerate(r)) for r in rows]
    n_fail = len(report.failed)
    locks = [r for r in report.rows if r.verdict == "locks"]
    out.append("")
    n_ind = sum(r.kind == "indicator" for r in report.rows)
    out.append(f"{len(report.rows)} quantities: {len(report.rows) - n_fail - len(locks)} within tolerance, "
               f"{n_fail} outside; {len(locks)} of {n_ind} locking indicator(s) show locking "
               f"(reported, not failed); {'full' if report.full else 'quick'} set in {report.seconds:.1f} s")
    for r in report.rows:
        if r.kind == "indicator":
            out.append(f"  {r.benchmark}: {r.note}")
    out.append("")
    out.append("VERIFIED: every quantity is within its tolerance." if report.ok
               else "NOT VERIFIED: " + ", ".join(f"{r.benchmark} ({r.quantity})" for r in report.failed))
    return "\n".join(out)


def write_report(report, out_dir: Path) -> dict[str, Path]:
    """Write ``verify.json`` and ``verify.html`` into ``out_dir``; returns their paths."""
    from ..files import write_text

    out_dir = Path(out_dir)
    out_dir.mkdir(parents=True, exist_ok=True)
    doc = {"verified": report.ok, "set": "full" if report.full else "quick", "seconds": report.seconds,
           "elastofe": report.version, "environment": report.environment, "caution": CAUTION,
           "rows": [{k: (None if isinstance(v, float) and not math.isfinite(v) else v)
                     for k, v in asdict(r).items()} for r in report.rows]}
    paths = {"json": out_dir / "verify.json", "html": out_dir / "verify.html"}
    write_text(paths["json"], json.dumps(doc, indent=2, ensure_ascii=False) + "\n")
    write_text(paths["html"], _html(report))
    return paths


def _html(report) -> str:
    e = html.escape
    head = "".join(f"<th>{e(c)}</th>" for c in COLUMNS + ("why", "mesh"))
    body = []
    for r, cells in zip(report.rows, table_rows(report)):
        cls = {"pass": "ok", "no locking": "ok", "FAIL": "bad", "locks": "warn"}[r.verdict]
        tds = "".join(f"<td>{e(c)}</td>" for c in cells[:6])
        tds += f'<td class="{cls}">{e(cells[6])}</td><td>{e(cells[7])}</td>'
        basis = f" Target: {r.target_basis}." if r.target_basis else ""
        tds += f"<td>{e(r.why + basis + (' ' + r.note if r.note else ''))}</td><td>{e(r.mesh)}</td>"
        body.append(f"<tr>{tds}</tr>")
    env = ", ".join(f"{e(k)} {e(str(v))}" for k, v in report.environment.items())
    status = ("Every quantity is within its tolerance." if report.ok else
              "Not verified: " + e(", ".join(f"{r.benchmark} ({r.quantity})" for r in report.failed)))
    return f"""<!DOCTYPE html>
<html lang="en"><head><meta charset="utf-8"><title>elastofe verification</title>
<style>
body {{ font-family: system-ui, sans-serif; margin: 2em; color: #222; }}
table {{ border-collapse: collapse; font-size: 0.85em; }}
th, td {{ border: 1px solid #ccc; padding: 0.25em 0.5em; vertical-align: top; text-align: left; }}
th {{ background: #eef; }}
td.ok {{ background: #d9f0d3; }} td.bad {{ background: #f4c7c3; font-weight: bold; }}
td.warn {{ background: #fde9b5; }}
.status {{ font-size: 1.2em; font-weight: bold; }}
</style></head><body>
<h1>elastofe {e(report.version)}: verification against published benchmarks</h1>
<p class="status">{status}</p>
<p>{'Full' if report.full else 'Quick'} set, {len(report.rows)} quantities, {report.seconds:.1f} s. {env}.</p>
<table><thead><tr>{head}</tr></thead><tbody>
{chr(10).join(body)}
</tbody></table>
<p>Error is relative to |target| unless the tolerance is absolute. A locking indicator
(verdict <em>locks</em> / <em>no locking</em>) reports how far an element departs in the
nearly incompressible limit; it does not fail the run.</p>
<p><strong>Caution.</strong> {e(CAUTION)}</p>
</body></html>
"""
