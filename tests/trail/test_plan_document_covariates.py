"""The analysis-plan document of a plan with covariates says, before any data exist, what will be
adjusted for, where the adjusted means will be taken, that hypotheses are about adjusted means, and
what the adjustment assumes; its contrasts over the coefficients carry a zero for each slope
(L = [C·D, 0]). The wording rules are the report's own (common practice, no source)."""

from __future__ import annotations

from ancova_project import write_ancova_project
from reporter.intake.plan import load_plan
from reporter.narrative.document import Paragraph, Table, plain
from reporter.trail.lock import build_lock
from reporter.trail.plan_document import build_plan_document


def _document(folder, **options):
    project = write_ancova_project(folder, **options)
    return build_plan_document(build_lock(load_plan(project.plan)))


def _paragraphs(doc) -> str:
    return "\n".join(plain(b.runs) for b in doc.walk() if isinstance(b, Paragraph))


def test_planned_methods_state_the_covariate_and_its_reference(tmp_path):
    """Common slope at the mean: the covariate, its slope, the mean of the rows analysed, adjusted means,
    Type I order and the assumption that the factors cannot change it."""
    text = _paragraphs(_document(tmp_path))
    assert ("The model will adjust for the covariate pretest (one slope common to all cells; adjusted means at the "
            "mean of the rows analysed)") in text
    assert "hypotheses about means will concern the adjusted means" in text
    assert "the covariates will enter first" in text
    assert "measured before allocation" in text


def test_per_cell_slopes_at_a_stated_value_and_zero_slope_columns(tmp_path):
    """Per-cell slopes at pretest = 50: said so; L = [C·D, 0] has a zero in each slope's column."""
    doc = _document(tmp_path, slopes="per-cell", adjust_to=50)
    text = _paragraphs(doc)
    assert "pretest (a separate slope in each cell; adjusted means at the value 50)" in text
    betas = [b for b in doc.walk() if isinstance(b, Table) and b.id.endswith("-betas")]
    assert betas
    for table in betas:
        assert "L = [C·D, 0]" in plain(table.caption)
        heads = [plain(c.label) for c in table.columns]
        assert heads[-4:-1] == ["β3", "β4", "β5"]
        assert all(plain(cell) == "0" for row in table.rows for cell in row[-4:-1])
