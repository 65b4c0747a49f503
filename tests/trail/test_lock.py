"""``anova-report lock``: the lock file, refusing to overwrite without --force, no data needed,
and the analysis-plan document (no results; the same PDF/A-3b checks as the report)."""

from __future__ import annotations

import hashlib
import io
import json
from pathlib import Path

import pytest
from pypdf import PdfReader

from render.test_pdf import (  # the report's PDF/A checks, run here on the analysis-plan PDF
    _text, test_attachments_are_associated_files, test_attachments_keep_their_exact_bytes,
    test_pages_are_a4_with_header_and_numbered_footer, test_pdfa_3b_identification,
)
from reporter.cli import main
from reporter.intake.canonical import plan_mapping
from reporter.intake.plan import load_plan
from reporter.trail.lock import LOCK_SCHEMA, document_paths, lock_path, read_lock
from trail_project import PLAN, data_text, write

EPOCH = "1735689600"  # 2025-01-01T00:00:00Z

__all__ = [  # the imported checks run as tests of this module, with its fixtures
    "test_attachments_are_associated_files", "test_attachments_keep_their_exact_bytes",
    "test_pages_are_a4_with_header_and_numbered_footer", "test_pdfa_3b_identification",
]


@pytest.fixture(scope="module")
def locked(tmp_path_factory):
    """The project locked with no data file present."""
    folder = tmp_path_factory.mktemp("locked")
    plan = write(folder)
    mp = pytest.MonkeyPatch()
    mp.setenv("SOURCE_DATE_EPOCH", EPOCH)
    try:
        assert main(["lock", str(plan)]) == 0
    finally:
        mp.undo()
    return plan


@pytest.fixture(scope="module")
def pdf_bytes(locked) -> bytes:
    return document_paths(locked)["pdf"].read_bytes()


@pytest.fixture(scope="module")
def reader(pdf_bytes) -> PdfReader:
    return PdfReader(io.BytesIO(pdf_bytes))


@pytest.fixture(scope="module")
def attachments(locked) -> dict[str, bytes]:
    return {"plan.toml": locked.read_bytes(), "plan.lock.json": lock_path(locked).read_bytes()}


@pytest.fixture(scope="module")
def build_document(locked):
    title = load_plan(locked).title

    class _Doc:  # what the imported page check reads of the document: its title
        pass

    doc = _Doc()
    doc.title = title
    return lambda: doc


def test_lock_works_without_the_data_file(locked):
    """The data file was never written; the lock and both documents were."""
    assert not (locked.parent / "heights.csv").exists()
    assert lock_path(locked).name == "plan.lock.json"
    for path in document_paths(locked).values():
        assert path.is_file()


def test_lock_content(locked):
    """Canonical plan, its SHA-256 (hashlib over the canonical JSON, keys sorted, no spaces), the time
    from SOURCE_DATE_EPOCH, the version, and the compiled contrasts."""
    doc = json.loads(lock_path(locked).read_bytes())
    assert doc["schema"] == LOCK_SCHEMA
    assert doc["canonical_plan"] == plan_mapping(load_plan(locked))
    assert doc["canonical_plan"]["planning"] == {"smallest_effect_f": 0.4, "smallest_effect_d": 0.8, "powers": [0.8, 0.9]}
    canonical = json.dumps(doc["canonical_plan"], sort_keys=True, separators=(",", ":"), ensure_ascii=False)
    assert doc["canonical_plan_sha256"] == hashlib.sha256(canonical.encode("utf-8")).hexdigest()
    assert doc["plan_file_sha256"] == hashlib.sha256(locked.read_bytes()).hexdigest()
    assert doc["created"] == "2025-01-01T00:00:00Z"
    assert "anova-report" in doc["software"]
    assert doc["cells"] == [["peat"], ["coir"], ["bark"], ["soil"]]
    first, second = doc["hypotheses"]
    assert (first["cells"], first["rhs"], first["alternative"]) == ([["0", "1", "-1", "0"]], ["0"], "greater")
    assert second["cells"] == [["1", "-1", "0", "0"], ["0", "1", "-1", "0"], ["0", "0", "1", "-1"]]
    assert read_lock(lock_path(locked)).sha256 == hashlib.sha256(lock_path(locked).read_bytes()).hexdigest()


def test_comments_do_not_change_the_canonical_hash(locked, tmp_path):
    """Comments and spacing change the plan file's hash, not the canonical plan's."""
    plan = write(tmp_path, "# a comment\n" + PLAN.replace('outcome = "height_mm"', 'outcome   =   "height_mm"  # mm'))
    assert main(["lock", str(plan)]) == 0
    a, b = (json.loads(lock_path(p).read_bytes()) for p in (locked, plan))
    assert a["canonical_plan_sha256"] == b["canonical_plan_sha256"]
    assert a["plan_file_sha256"] != b["plan_file_sha256"]


def test_existing_lock_is_refused_without_force(tmp_path, capsys, monkeypatch):
    """A second lock exits 2 with one message naming the lock and --force, and changes nothing;
    with --force the lock is replaced."""
    plan = write(tmp_path)
    monkeypatch.setenv("SOURCE_DATE_EPOCH", EPOCH)
    assert main(["lock", str(plan)]) == 0
    before = {p: p.read_bytes() for p in (lock_path(plan), *document_paths(plan).values())}
    plan.write_text(PLAN.replace("smallest_effect_f = 0.4", "smallest_effect_f = 0.5"), encoding="utf-8")
    capsys.readouterr()
    assert main(["lock", str(plan)]) == 2
    err = capsys.readouterr().err
    assert "plan.lock.json" in err and "already locked" in err and "--force" in err and "Traceback" not in err
    assert {p: p.read_bytes() for p in before} == before
    monkeypatch.setenv("SOURCE_DATE_EPOCH", str(int(EPOCH) + 60))
    assert main(["lock", str(plan), "--force"]) == 0
    doc = json.loads(lock_path(plan).read_bytes())
    assert doc["canonical_plan"]["planning"]["smallest_effect_f"] == 0.5
    assert doc["created"] == "2025-01-01T00:01:00Z"


def test_lock_of_a_bad_plan_writes_nothing(tmp_path, capsys):
    """A plan error exits 2 with the plan's message (key and did-you-mean), and no file appears."""
    plan = write(tmp_path, PLAN.replace("smallest_effect_d", "smallest_efect_d"))
    assert main(["lock", str(plan)]) == 2
    err = capsys.readouterr().err
    assert "planning.smallest_efect_d" in err and "Did you mean 'smallest_effect_d'?" in err
    assert sorted(p.name for p in tmp_path.iterdir()) == ["plan.toml"]


def test_edited_lock_is_refused(locked, tmp_path, capsys):
    """A lock whose canonical plan was edited by hand no longer matches its hash: run refuses it."""
    doc = json.loads(lock_path(locked).read_bytes())
    doc["canonical_plan"]["analysis"]["alpha"] = 0.1
    edited = tmp_path / "edited.lock.json"
    edited.write_text(json.dumps(doc), encoding="utf-8")
    plan = write(tmp_path)
    (tmp_path / "heights.csv").write_text(data_text(), encoding="utf-8")
    assert main(["run", str(plan), "--lock", str(edited), "--out", str(tmp_path / "out")]) == 2
    err = capsys.readouterr().err
    assert "edited.lock.json" in err and "changed after it was written" in err
    assert not (tmp_path / "out").exists()


def test_plan_document_has_no_results(reader, locked):
    """Methods in the future tense, hypotheses with H0/H1 and contrasts, the power table; no results,
    no test statistics, no p values."""
    text = " ".join(_text(p) for p in reader.pages)
    html = document_paths(locked)["html"].read_text(encoding="utf-8")
    for expected in ("Planned methods", "will be modelled", "H0:", "H1:", "as a contrast over the cell means",
                     "What each coefficient will estimate", "Error rates", "A-priori power", "About this plan"):
        assert expected in text and expected in html, expected
    for forbidden in ("Results", "p =", "p <", "t(", "F(3, 1", "Cell summary", "Analysis of variance of"):
        assert forbidden not in text, forbidden
    assert "Analysis plan written by anova-report" in html


def test_plan_document_is_deterministic(locked, tmp_path, monkeypatch):
    """Locking the same plan again with the same SOURCE_DATE_EPOCH gives the same bytes."""
    plan = write(tmp_path)
    monkeypatch.setenv("SOURCE_DATE_EPOCH", EPOCH)
    assert main(["lock", str(plan)]) == 0
    assert lock_path(plan).read_bytes() == lock_path(locked).read_bytes()
    for fmt in ("html", "pdf"):
        assert document_paths(plan)[fmt].read_bytes() == document_paths(locked)[fmt].read_bytes()


@pytest.mark.parametrize("name", ["oneway", "factorial", "baseline"])
def test_locks_follow_the_published_schema(name, locked):
    """The demo's committed locks and a fresh one validate against reporter/schema/lock-1.schema.json
    (jsonschema, Draft 2020-12), and each demo lock matches its plan as it is now."""
    import jsonschema
    from importlib import resources

    from reporter.api import prepare

    schema = json.loads(resources.files("reporter.schema").joinpath("lock-1.schema.json").read_text(encoding="utf-8"))
    demo = Path(__file__).resolve().parents[2] / "demo_project"
    for path in (demo / f"{name}.lock.json", lock_path(locked)):
        jsonschema.Draft202012Validator(schema).validate(json.loads(path.read_bytes()))
    assert prepare(demo / f"{name}.toml").lock.matched
