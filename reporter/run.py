"""``anova-report run``: fit a prepared analysis and write the requested files, all or nothing.

Every output is rendered in memory first; only then are the files written, each to a temporary
name in the output folder and renamed into place. A failure before that point leaves no file
behind, and the input files are never opened for writing.
"""

from __future__ import annotations

import os
import tempfile
from fractions import Fraction
from pathlib import Path

from reporter.errors import OptionError, RenderError
from reporter.fitting.analysis import Analysis, fit_analysis
from reporter.provenance import collect_provenance

FILE_NAMES = {"json": "results.json", "html": "report.html", "pdf": "report.pdf", "md": "report.md"}


def analyse(prep) -> Analysis:
    """Fit everything for a prepared plan."""
    a = prep.plan.analysis
    data = prep.data
    pivot_exact = Fraction(data.pivot_text) if data.exact_decimal else Fraction(data.pivot)
    return fit_analysis(
        prep.design,
        data.y,
        prep.cell,
        prep.contrasts,
        alpha=a.alpha,
        ss_type=a.ss_type,
        correction=a.correction,
        pivot=data.pivot,
        pivot_exact=pivot_exact,
        unequal_variances=a.unequal_variances,
        posthoc=a.posthoc,
        posthoc_on=a.posthoc_on,
        control=a.control,
        permutations=a.permutations,
        seed=a.seed,
    )


def render_outputs(prep, analysis: Analysis, formats) -> dict[str, bytes]:
    """The bytes of each requested format (imports only what those formats need)."""
    from reporter.render.results_json import render_json, results_dict

    provenance = collect_provenance(prep)
    results = render_json(results_dict(prep, analysis, provenance))
    document = None
    if {"html", "pdf", "md"} & set(formats):
        from reporter.narrative.build import build_document

        document = build_document(prep, analysis, provenance)
    out: dict[str, bytes] = {}
    for fmt in formats:
        if fmt == "json":
            out[fmt] = results
        elif fmt == "html":
            from reporter.render.html import render_html

            out[fmt] = render_html(document)
        elif fmt == "md":
            from reporter.render.markdown import render_markdown

            out[fmt] = render_markdown(document)
        elif fmt == "pdf":
            from reporter.render.pdf import render_pdf

            out[fmt] = render_pdf(document, _attachments(prep, results))
        else:
            raise RenderError(f"--format {fmt}: unknown format.")
    return out


def _attachments(prep, results: bytes) -> dict[str, bytes]:
    """The plan file as read and the results JSON, embedded in the archival PDF."""
    plan_bytes = b""
    if prep.plan.source is not None:
        plan_bytes = Path(prep.plan.source).read_bytes()
    return {"plan.toml": plan_bytes, "results.json": results}


def _check_out_dir(out: Path, plan, data_path: Path) -> None:
    if out.exists() and not out.is_dir():
        raise OptionError(f"--out {out}: exists and is not a folder; give a folder for the report files.")
    inputs = {p.resolve() for p in (Path(plan.source) if plan.source else None, data_path) if p}
    for name in FILE_NAMES.values():
        if (out / name).resolve() in inputs:
            raise OptionError(f"--out {out}: writing {name} there would overwrite an input file; choose another folder.")


def write_outputs(prep, out: Path, formats) -> list[Path]:
    """Check the output folder, fit, render every format in memory, then write the files atomically."""
    _check_out_dir(out, prep.plan, prep.plan.data.path)  # before fitting: fail fast
    return _write(prep, analyse(prep), out, formats)


def write_files(prep, analysis: Analysis, out: Path, formats) -> list[Path]:
    """Render every format of a fitted analysis in memory, then write the files atomically."""
    _check_out_dir(out, prep.plan, prep.plan.data.path)
    return _write(prep, analysis, out, formats)


def _write(prep, analysis: Analysis, out: Path, formats) -> list[Path]:
    blobs = render_outputs(prep, analysis, formats)
    try:
        out.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise OptionError(f"--out {out}: cannot create the folder ({exc.strerror}).") from None
    written, temps = [], []
    try:
        for fmt, blob in blobs.items():
            fd, tmp = tempfile.mkstemp(prefix=".anova-report-", dir=out)
            temps.append(tmp)
            with os.fdopen(fd, "wb") as fh:
                fh.write(blob)
        umask = os.umask(0)
        os.umask(umask)
        for (fmt, _), tmp in zip(blobs.items(), temps):
            os.chmod(tmp, 0o666 & ~umask)
            target = out / FILE_NAMES[fmt]
            os.replace(tmp, target)
            written.append(target)
    except OSError as exc:
        for tmp in temps:
            if os.path.exists(tmp):
                os.unlink(tmp)
        raise OptionError(f"--out {out}: cannot write the report files ({exc.strerror}).") from None
    return written
