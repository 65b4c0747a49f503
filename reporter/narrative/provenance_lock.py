"""Where the report came from: the provenance block (inputs, hashes, how the outcome was read,
seeds, software) and the comparison of the run with its locked plan."""

from __future__ import annotations

import shlex

from reporter.narrative import numbers as N
from reporter.narrative.document import BulletList, DefinitionList, Paragraph, Section, runs_of
from reporter.narrative.phrases import _count_noun, _literal


class ProvenanceSections:
    """The section “Where this report came from”."""

    def provenance(self) -> Section:
        p = self.prov
        items = [
            (runs_of("Plan file"), runs_of(_literal(p.plan_file) if p.plan_file else "(built in Python)")),
            (runs_of("Plan SHA-256"), runs_of(_literal(p.plan_sha256) if p.plan_sha256 else "—")),
            (runs_of("Data file"), runs_of("none: data given in Python") if p.data_format == "dataframe" else
             runs_of(_literal(p.data_file), f" ({p.data_format}"
                                            + (", read out-of-core by DuckDB)" if p.data_reader == "out-of-core" else ")"))),
            (runs_of("Data SHA-256"), runs_of(_literal(p.data_sha256) if p.data_sha256 else "—")),
            (runs_of("How the outcome was read"), runs_of(self.intake_words())),
            *self.provenance_more(),
            (runs_of("Software"), runs_of(", ".join(f"{k} {v}" for k, v in p.software))),
            (runs_of("Created"), runs_of(p.created)),
        ]
        return Section("provenance", "Where this report came from", (
            Paragraph(runs_of("Re-running the same plan on a data file with the same SHA-256 reproduces every "
                              "number in this report; anova-report verify, given results.json or the PDF report, "
                              "does that and compares every number.")),
            DefinitionList(tuple(items)),
        ))

    def provenance_more(self) -> list:
        """Size, rows, paths, platform, command line, seeds and the lock of the provenance block."""
        p = self.prov
        items = []
        if p.data_bytes is not None:
            items.append((runs_of("Data file size"), runs_of(_count_noun(p.data_bytes, "byte"))))
        if p.rows_read is not None:
            excluded = "; ".join(f"{_count_noun(n, 'row')} {reason}" for reason, n in p.rows_excluded)
            items.append((runs_of("Rows"), runs_of(
                f"{N.format_count(p.rows_read)} read, {N.format_count(p.rows_used)} used, "
                + (f"excluded: {excluded}" if excluded else "none excluded"))))
        where = "relative to the folder of results.json" if p.paths_relative_to == "results-folder" else "as given"
        paths = [("plan ", p.plan_path), ("data ", p.data_path)]
        paths = [(label, _literal(path)) for label, path in paths if path]
        if paths:
            items.append((runs_of("Input paths"), runs_of(*paths[0], *(("; ", *x) for x in paths[1:]), f" ({where})")))
        if p.lock_sha256:
            items.append((runs_of("Plan lock SHA-256"), runs_of(_literal(p.lock_sha256))))
        if p.results_sha256:
            items.append((runs_of("Results digest"), runs_of(
                _literal(p.results_sha256), " (results_sha256 of the results.json made with this report)")))
        items.append((runs_of("Command line"), runs_of(
            _literal(shlex.join(p.argv)) if p.argv is not None
            else "none: made from Python, not by the anova-report command")))
        if p.platform:
            items.append((runs_of("Platform"), runs_of(_literal(p.platform))))
        if p.randomness is not None:
            items.append((runs_of("Random seeds and permutations"), runs_of(self.randomness_words())))
        return items

    def randomness_words(self) -> str:
        r = self.prov.randomness
        used = " and ".join(r.seed_used_by) if r.seed_used_by else "nothing in this run"
        parts = [f"seed {r.seed} (used by: {used})"]
        if r.permutations:
            parts.append(f"up to {N.format_count(r.permutations)} permutations per permutation F test, stopping once "
                         f"{r.permutation_stop_after} permuted F reach the observed one, skipped above "
                         f"{_count_noun(r.permutation_max_rows, 'row')}")
        if r.permutations_run:
            parts.append("permutations drawn: " + ", ".join(f"{N.format_count(m)} for “{test}”"
                                                           for test, m in r.permutations_run))
        if r.shapiro_sample is not None:
            parts.append(f"Shapiro–Wilk on a sample of {N.format_count(r.shapiro_sample)} residuals")
        parts.append(f"figure jitter seed {r.figure_jitter_seed}")
        return "; ".join(parts) + "."
    def intake_words(self) -> str:
        data = self.prep.data
        summary = getattr(data, "summary", None) is not None
        source = "from a table of cell summaries (each cell's count, mean and spread); " if summary else ""
        what, each = ("cell means", "mean") if summary else ("values of the outcome", "value")
        if data.exact_decimal:
            return (f"{source}from the text of the file, as exact decimals: one of the {what}, {data.pivot_text}, was "
                    f"subtracted from every {each} in exact decimal arithmetic, and only these differences were "
                    "converted to binary floating point, so no digits are lost when the values are large or close "
                    "together. Means and other locations are reported on the file's own scale.")
        where = "given in Python" if self.prov.data_format == "dataframe" else f"stored in the {self.prov.data_format} file"
        return (f"{source}as the binary floating-point numbers {where}, which carry "
                "about 15 to 17 significant digits.")


def lock_sections(check) -> tuple[Section, ...]:
    """The comparison of the run with its locked plan (none without a lock): a match, or every deviation."""
    if check is None:
        return ()
    where = runs_of(f"the plan locked at {check.created} (lock file ", _literal(check.path.name), ", SHA-256 ",
                    _literal(check.sha256), "; canonical plan SHA-256 ", _literal(check.canonical_sha256),
                    ", as printed in the analysis-plan document)")
    if check.matched:
        return (Section("lock", "Comparison with the locked plan", (Paragraph(runs_of(
            "The analysis matched ", where, ": no hypothesis, option, factor, level or exclusion rule changed since, "
            "and the data hold no level that the locked plan did not list.")),)),)
    n = len(check.deviations)
    blocks = [Paragraph(runs_of("The analysis departs from ", where, f" in {_count_noun(n, 'way')}:")),
              BulletList(tuple(runs_of(d.text) for d in check.deviations))]
    if check.added:
        blocks.append(Paragraph(runs_of(
            "Hypotheses added after the lock are reported as exploratory, whatever role the plan gives them, and their "
            "p values are adjusted within the exploratory family."), "small"))
    return (Section("lock", "Comparison with the locked plan", tuple(blocks)),)
