"""Comparison reports: report.json, a JUnit XML file, a Markdown table and one overlay plot per item.

Every file is written atomically (temporary file, then rename). Plots use a private matplotlib
``Figure`` with the Agg canvas, never pyplot's global state.
"""

from __future__ import annotations

import os
import sys
import xml.etree.ElementTree as ET
from collections.abc import Sequence
from pathlib import Path
from typing import Any

import numpy as np

from fvrans.errors import CaseError
from fvrans.post._plot_data import cap_text
from fvrans.post.writers import atomic_path, atomic_write, output_file, to_jsonable, write_json_atomic
from fvrans.verify.compare import ItemResult, compare
from fvrans.verify.spec import Spec, load_spec

REPORT_JSON = "report.json"
JUNIT_XML = "junit.xml"
SUMMARY_MD = "summary.md"
PLOT_DIR = "plots"


def save_figure(fig: Any, path: str | os.PathLike) -> None:
    """Save a matplotlib Figure (Agg canvas attached here) atomically as PNG."""
    from matplotlib.backends.backend_agg import FigureCanvasAgg

    FigureCanvasAgg(fig)
    with atomic_path(path, suffix=".png") as tmp:
        fig.savefig(tmp, format="png", dpi=110)


def plot_item(res: ItemResult, path: str | os.PathLike) -> None:
    """Overlay of result and reference (curves), or result against reference (fields, scalars)."""
    from matplotlib.figure import Figure

    fig = Figure(figsize=(6.4, 4.2))
    ax = fig.add_subplot(1, 1, 1)
    ok = {"pass": "pass", "fail": "FAIL"}.get(res.status, res.status)
    if res.kind in ("wall", "profile", "line") and res.result_curve is not None:
        rc, fc = res.result_curve, res.reference_curve
        ax.plot(rc.x, rc.y, "-", lw=1.4, label="result")
        if fc is not None:
            ax.plot(fc.x, fc.y, "o", ms=3.5, mfc="none", label="reference")
        if res.compared_range is not None:
            ax.axvspan(*res.compared_range, color="0.9", zorder=0, label="compared")
        if res.compared_range is not None:  # y limits from the compared part (a leading-edge peak
            lo, hi = res.compared_range  # elsewhere would flatten the compared curves)
            ys = [rc.y[(rc.x >= lo) & (rc.x <= hi)]] + ([fc.y] if fc is not None else [])
            ys = np.concatenate(ys)
            if ys.size and np.all(np.isfinite(ys)):
                pad = 0.15 * max(float(ys.max() - ys.min()), 1e-12 * max(1.0, float(np.abs(ys).max())))
                ax.set_ylim(float(ys.min()) - pad, float(ys.max()) + pad)
        ax.set_xlabel(cap_text(res.x_label))
        if res.log_x and rc.x.size and rc.x.max() > 0:
            ax.set_xscale("log")
        ax.set_ylabel(cap_text(res.label or res.name))
    elif res.compared is not None:
        _, ours, ref = res.compared
        if res.kind == "scalar":
            ax.bar([0, 1], [float(ours[0]), float(ref[0])], color=["C0", "C1"])
            ax.set_xticks([0, 1], ["result", "reference"])
            ax.set_ylabel(cap_text(res.label or res.name))
        else:
            ax.plot(ref, ours, ".", ms=2, label="cells")
            if len(ref):
                lo, hi = float(min(ref.min(), ours.min())), float(max(ref.max(), ours.max()))
                ax.plot([lo, hi], [lo, hi], "k-", lw=0.8, label="equality")
            ax.set_xlabel("reference")
            ax.set_ylabel("result")
    value = f"{res.metric} = {res.value:.4g}" if res.value is not None else res.metric
    ax.set_title(f"{cap_text(res.name)}: {value} (tolerance {res.tolerance:.4g}) {ok}", fontsize=10)
    if ax.get_legend_handles_labels()[0]:
        ax.legend(fontsize=8)
    ax.grid(True, lw=0.3)
    fig.tight_layout()
    save_figure(fig, path)


def junit_xml(results: Sequence[ItemResult], suite: str) -> str:
    """One test case per item; failures and errors carry the message."""
    fails = sum(r.status == "fail" for r in results)
    errors = sum(r.status == "error" for r in results)
    root = ET.Element("testsuites", tests=str(len(results)), failures=str(fails), errors=str(errors))
    ts = ET.SubElement(root, "testsuite", name=suite, tests=str(len(results)), failures=str(fails),
                       errors=str(errors), skipped="0")
    for r in results:
        tc = ET.SubElement(ts, "testcase", classname=f"compare.{r.kind}", name=r.name)
        if r.status == "fail":
            ET.SubElement(tc, "failure", message=r.message, type="tolerance").text = _details(r)
        elif r.status == "error":
            ET.SubElement(tc, "error", message=r.message, type="input").text = r.message
        else:
            ET.SubElement(tc, "system-out").text = _details(r)
    ET.indent(root)
    return '<?xml version="1.0" encoding="UTF-8"?>\n' + ET.tostring(root, encoding="unicode") + "\n"


def _details(r: ItemResult) -> str:
    lines = [r.message, f"metric {r.metric} = {r.value}", f"tolerance {r.tolerance}",
             f"compared points {r.n_points}"]
    if r.coverage is not None:
        lines.append(f"coverage {r.coverage:.1%}")
    if r.compared_range is not None:
        lines.append(f"compared range [{r.compared_range[0]:.6g}, {r.compared_range[1]:.6g}]")
    return "\n".join(lines)


def _md_cell(text: str) -> str:
    return text.replace("|", "\\|").replace("\n", " ")


def markdown_table(results: Sequence[ItemResult], title: str) -> str:
    """A Markdown summary: one row per item, then the messages of failed and broken items."""
    n_pass = sum(r.passed for r in results)
    out = [f"# {title or 'Comparison'}", "", f"{n_pass} of {len(results)} items pass.", "",
           "| item | kind | metric | value | tolerance | coverage | points | status |",
           "|---|---|---|---:|---:|---:|---:|---|"]
    for r in results:
        val = f"{r.value:.4g}" if r.value is not None else "-"
        cov = f"{r.coverage:.1%}" if r.coverage is not None else "-"
        status = {"pass": "pass", "fail": "**FAIL**", "error": "**ERROR**"}[r.status]
        out.append(f"| {_md_cell(r.name)} | {r.kind} | {r.metric} | {val} | {r.tolerance:.4g} | {cov} | "
                   f"{r.n_points} | {status} |")
    bad = [r for r in results if not r.passed]
    if bad:
        out += ["", "## Failed items", ""]
        out += [f"- **{_md_cell(r.name)}**: {_md_cell(r.message)}" for r in bad]
    return "\n".join(out) + "\n"


def write_report(results: Sequence[ItemResult], spec: Spec, result_dir: str | os.PathLike,
                 report_dir: str | os.PathLike, plots: bool = True) -> dict[str, Any]:
    """Write report.json, junit.xml, summary.md and plots/<item>.png into ``report_dir``."""
    out = Path(report_dir)
    try:
        (out / PLOT_DIR).mkdir(parents=True, exist_ok=True) if plots else out.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise CaseError(f"cannot create the report directory {out}: {exc.strerror}") from None
    for r in results:
        if plots and r.status != "error":
            path = output_file(out, r.name, ".png", subfolder=PLOT_DIR, what=f"item {r.name!r}")
            rel = f"{PLOT_DIR}/{path.name}"
            plot_item(r, path)
            r.plot = rel
    n_fail = sum(r.status == "fail" for r in results)
    n_err = sum(r.status == "error" for r in results)
    report = {
        "title": spec.title, "spec": str(spec.path), "result_dir": str(result_dir),
        "passed": n_fail == 0 and n_err == 0, "n_items": len(results),
        "n_passed": len(results) - n_fail - n_err, "n_failed": n_fail, "n_errors": n_err,
        "items": [r.to_json() for r in results],
    }
    report = to_jsonable(report)
    write_json_atomic(out / REPORT_JSON, report)
    xml = junit_xml(results, spec.title or Path(spec.path).stem)
    atomic_write(out / JUNIT_XML, lambda f: f.write(xml))
    md = markdown_table(results, spec.title)
    atomic_write(out / SUMMARY_MD, lambda f: f.write(md))
    return report


def compare_command(result_dir: str | os.PathLike, spec_path: str | os.PathLike,
                    report_dir: str | os.PathLike, stream: Any = None) -> int:
    """``fvrans compare``: exit status 0 when all items pass, 1 when any fails, 2 for bad input
    (unreadable spec, result directory or reference; the report is still written when the spec is
    readable, with the broken items marked "error")."""
    out = stream if stream is not None else sys.stdout  # results to stdout, errors to stderr
    err = stream if stream is not None else sys.stderr
    try:
        spec = load_spec(spec_path)
        if not Path(result_dir).is_dir():
            raise CaseError(f"result directory {result_dir} does not exist")
        results = compare(result_dir, spec)
        write_report(results, spec, result_dir, report_dir)
    except CaseError as exc:
        print(f"error: {exc}", file=err)
        return 2
    for r in results:
        tag = {"pass": "pass ", "fail": "FAIL ", "error": "ERROR"}[r.status]
        print(f"{tag} {r.name}: {r.message}", file=out)
    if any(r.status == "error" for r in results):
        return 2
    return 1 if any(r.status == "fail" for r in results) else 0
