"""Catalogue of hostile conditions at the output end: each gets one clear answer.

Classes: an output target that cannot take the report (checked before the fit); a failure or a
signal while the files are renamed into place (rolled back); a closed standard output (broken
pipe); the crash file of an internal error; user text with maths markup in figures; control
and bidirectional characters in every output; the documented exit codes. Every case asserts
the exit code, one line on stderr without a traceback, no temporary file left and the
previous outputs intact. The interruptions come from a test hook between two renames
(``reporter.run.after_rename``), not from timing.
"""

from __future__ import annotations

import html
import os
import re
import signal
import stat
import subprocess
import sys
import tempfile
from pathlib import Path

import pytest

from conftest import ONEWAY_DATA, ONEWAY_PLAN
from reporter import cli, run as run_module
from reporter.cli import EXIT_CODES, main
from reporter.narrative.document import FigureSpec
from reporter.render import figures
from reporter.render.visible import HIDDEN_CHARACTERS, show_controls

ROOT = Path(__file__).resolve().parents[1]
PREVIOUS = {"results.json": b'{"previous": true}\n', "report.md": b"# previous\n", "report.html": b"<p>previous</p>\n"}

# Unicode Standard Annex #9 (Unicode Bidirectional Algorithm), section 2: the explicit
# formatting characters; and the C0/C1 control ranges of ISO/IEC 6429 (Unicode category Cc).
BIDI = [0x061C, 0x200E, 0x200F, *range(0x202A, 0x202F), *range(0x2066, 0x206A)]
CONTROLS = [*range(0x00, 0x20), *range(0x7F, 0xA0)]


@pytest.fixture
def oneway(project):
    return project(ONEWAY_PLAN, {"heights.csv": ONEWAY_DATA})


@pytest.fixture
def no_fit(monkeypatch):
    """Make fitting an internal error: a refusal that exits 2 was decided before the fit."""

    def fit(prep, **_):
        raise AssertionError("the model was fitted before the output folder was checked")

    monkeypatch.setattr(run_module, "analyse", fit)


def previous_outputs(folder: Path) -> dict[str, bytes]:
    folder.mkdir(parents=True, exist_ok=True)
    for name, content in PREVIOUS.items():
        (folder / name).write_bytes(content)
    return snapshot(folder)


def snapshot(folder: Path) -> dict[str, bytes | str]:
    """Every entry of the folder, hidden ones included: files by content, links by target,
    folders by mode."""
    if not folder.exists():
        return {}

    def entry(p: Path):
        if p.is_symlink():
            return f"link to {os.readlink(p)}"
        return p.read_bytes() if p.is_file() else f"folder {stat.filemode(p.stat().st_mode)}"

    return {p.name: entry(p) for p in sorted(folder.iterdir())}


def one_line(err: str) -> str:
    assert "Traceback" not in err
    lines = err.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("anova-report: "), err
    return lines[0]


# ---------------------------------------------------------------- the target, checked before the fit


def _out_is_a_file(tmp):
    (tmp / "afile.txt").write_text("not a folder")
    return tmp / "afile.txt", "exists and is not a folder"


def _results_json_is_a_folder(tmp):
    (tmp / "out" / "results.json").unlink()
    (tmp / "out" / "results.json").mkdir()
    return tmp / "out", "results.json is a folder"


def _report_html_is_read_only(tmp):
    (tmp / "out" / "report.html").chmod(0o444)
    return tmp / "out", "report.html is read-only"


def _folder_is_read_only(tmp):
    (tmp / "out").chmod(0o555)
    return tmp / "out", "cannot write into the folder: it is read-only"


def _parent_is_read_only(tmp):
    (tmp / "out").chmod(0o555)
    return tmp / "out" / "new" / "deeper", "cannot create the folder, because"


def _parent_is_a_file(tmp):
    (tmp / "afile").write_text("x")
    return tmp / "afile" / "sub", "is not a folder"


def _empty(tmp):
    return "", "--out is empty"


def _blank(tmp):
    return "  ", "--out is empty"


def _output_links_to_the_data_file(tmp):
    (tmp / "out" / "results.json").unlink()
    (tmp / "out" / "results.json").symlink_to(tmp / "heights.csv")
    return tmp / "out", "would overwrite an input file"


def _name_too_long(tmp):
    return tmp / ("x" * 5000), "cannot be used (File name too long)"


def _nul_in_name(tmp):
    return "out\0x", "cannot hold a NUL character"


def _dangling_link(tmp):
    (tmp / "link").symlink_to(tmp / "nowhere")
    return tmp / "link", "symbolic link to nothing"


@pytest.mark.parametrize(
    "make",
    [_out_is_a_file, _results_json_is_a_folder, _report_html_is_read_only, _folder_is_read_only,
     _parent_is_read_only, _parent_is_a_file, _empty, _blank, _output_links_to_the_data_file, _name_too_long, _nul_in_name, _dangling_link],
    ids=lambda f: f.__name__.strip("_"),
)
def test_unusable_target_is_refused_before_the_fit(make, oneway, tmp_path, no_fit, capsys):
    """An output target that cannot take the files exits 2 before fitting, with one line,
    and leaves the folder (and the previous outputs in it) exactly as it was."""
    previous_outputs(tmp_path / "out")
    out, expected = make(tmp_path)
    before = {p: snapshot(p) for p in (tmp_path, tmp_path / "out")}
    try:
        code = main(["run", str(oneway), "--out", str(out), "--format", "json,md,html"])
        err = capsys.readouterr().err
        after = {p: snapshot(p) for p in before}
    finally:
        (tmp_path / "out").chmod(0o755)
    assert code == 2, err
    line = one_line(err)
    assert expected in line and len(line) < 400
    assert after == before


def test_output_path_that_is_an_input_through_a_link_is_refused(project, tmp_path, no_fit, capsys):
    """A report file name that is a hard link to the data file counts as the data file."""
    plan = project(ONEWAY_PLAN, {"heights.csv": ONEWAY_DATA})
    (tmp_path / "out").mkdir()
    os.link(tmp_path / "heights.csv", tmp_path / "out" / "report.md")
    code = main(["run", str(plan), "--out", str(tmp_path / "out"), "--format", "md"])
    assert code == 2 and "would overwrite an input file" in one_line(capsys.readouterr().err)
    assert (tmp_path / "heights.csv").read_text() == ONEWAY_DATA


# ---------------------------------------------------------------- failures and signals while renaming


def _hook(action, after: int = 1):
    """A hook that does ``action`` right after the ``after``-th rename."""
    done = []

    def hook(target):
        done.append(target)
        if len(done) == after:
            action()

    return hook


def _raise(exc):
    def action():
        raise exc

    return action


def _send(signum):
    return lambda: os.kill(os.getpid(), signum)


@pytest.mark.parametrize(
    "action, after, code, message",
    [
        (_raise(KeyboardInterrupt()), 1, 130, "stopped by SIGINT; the output folder was left as it was."),
        (_raise(KeyboardInterrupt()), 2, 130, "stopped by SIGINT; the output folder was left as it was."),
        (_send(signal.SIGINT), 1, 130, "stopped by SIGINT; the output folder was left as it was."),
        (_send(signal.SIGTERM), 1, 143, "stopped by SIGTERM; the output folder was left as it was."),
        (_send(signal.SIGTERM), 3, 143, "stopped by SIGTERM; the output folder was left as it was."),
        (_raise(OSError(28, "No space left on device")), 2, 2,
         "cannot write the report files (No space left on device); the output folder was left as it was."),
        (_raise(RuntimeError("disk driver fault")), 1, 3, "internal error (RuntimeError: disk driver fault)"),
    ],
    ids=["keyboard-interrupt-after-first", "keyboard-interrupt-after-second", "sigint-after-first",
         "sigterm-after-first", "sigterm-after-last", "disk-full-after-second", "internal-error-after-first"],
)
def test_interrupted_renames_roll_back(action, after, code, message, oneway, tmp_path, monkeypatch, capsys):
    """An exception or signal between two renames puts every previous file back, removes the
    new ones and every temporary file, and exits with the documented code and one line."""
    monkeypatch.setattr(tempfile, "tempdir", str(tmp_path / "crash"))
    (tmp_path / "crash").mkdir()
    out = tmp_path / "out"
    before = previous_outputs(out)
    (out / "report.md").unlink()  # one format is new: rolling back removes it
    before = snapshot(out)
    handlers = {s: signal.getsignal(s) for s in (signal.SIGINT, signal.SIGTERM)}
    monkeypatch.setattr(run_module, "after_rename", _hook(action, after))
    result = main(["run", str(oneway), "--out", str(out), "--format", "json,md,html"])
    err = capsys.readouterr().err
    assert result == code, err
    assert message in one_line(err)
    assert snapshot(out) == before
    assert {s: signal.getsignal(s) for s in handlers} == handlers


def test_interrupted_first_run_removes_the_folder_it_made(oneway, tmp_path, monkeypatch, capsys):
    """A run into a folder that did not exist, stopped after a rename, leaves no folder behind."""
    monkeypatch.setattr(run_module, "after_rename", _hook(_send(signal.SIGTERM), 1))
    code = main(["run", str(oneway), "--out", str(tmp_path / "new" / "out"), "--format", "json,md"])
    assert code == 143 and "stopped by SIGTERM" in one_line(capsys.readouterr().err)
    assert not (tmp_path / "new").exists()


def test_rollback_without_hard_links(oneway, tmp_path, monkeypatch, capsys):
    """Where the file system refuses hard links, the previous files are kept aside as copies,
    and an interruption still puts them back and leaves nothing else."""

    def no_links(*args, **kwargs):
        raise PermissionError(1, "Operation not permitted")

    monkeypatch.setattr(os, "link", no_links)
    out = tmp_path / "out"
    before = previous_outputs(out)
    monkeypatch.setattr(run_module, "after_rename", _hook(_send(signal.SIGTERM), 2))
    assert main(["run", str(oneway), "--out", str(out), "--format", "json,md,html"]) == 143
    assert "the output folder was left as it was" in one_line(capsys.readouterr().err)
    assert snapshot(out) == before


def test_python_api_write_rolls_back_on_keyboard_interrupt(oneway, tmp_path, monkeypatch):
    """Report.write, outside the command, also restores the folder on Ctrl-C and says so."""
    import reporter

    report = reporter.report(str(oneway))
    out = tmp_path / "out"
    before = previous_outputs(out)
    monkeypatch.setattr(run_module, "after_rename", _hook(_raise(KeyboardInterrupt()), 1))
    with pytest.raises(KeyboardInterrupt) as info:
        report.write(out, formats=("json", "md"))
    assert info.value.__notes__ == ["the output folder was left as it was"]
    assert snapshot(out) == before


def test_completed_run_replaces_everything_and_leaves_no_temporary_file(oneway, tmp_path, capsys):
    """Without interruption, every report file is new and no temporary or kept-aside file remains."""
    out = tmp_path / "out"
    previous_outputs(out)
    assert main(["run", str(oneway), "--out", str(out), "--format", "json,md,html"]) == 0
    after = snapshot(out)
    assert sorted(after) == sorted(PREVIOUS)
    assert all(after[name] != PREVIOUS[name] for name in PREVIOUS)


def test_stopped_before_writing_says_nothing_was_written(oneway, tmp_path, monkeypatch, capsys):
    """A signal during the fit stops the run with nothing written."""

    def fit(prep, **_):
        os.kill(os.getpid(), signal.SIGTERM)
        raise AssertionError("the signal did not stop the run")

    monkeypatch.setattr(run_module, "analyse", fit)
    code = main(["run", str(oneway), "--out", str(tmp_path / "out"), "--format", "json"])
    assert code == 143
    assert one_line(capsys.readouterr().err) == "anova-report: stopped by SIGTERM; no file was written."
    assert not (tmp_path / "out").exists()


# ---------------------------------------------------------------- a closed standard output


def _closed_pipe_run(args, cwd):
    """Run the command with stdout on a pipe whose reading end is already closed."""
    read_end, write_end = os.pipe()
    os.close(read_end)
    try:
        return subprocess.run([sys.executable, "-m", "reporter", *args], stdout=write_end,
                              stderr=subprocess.PIPE, text=True, cwd=cwd)
    finally:
        os.close(write_end)


def test_broken_pipe_on_check_is_quiet(oneway, tmp_path):
    """check into a closed pipe (as in `check PLAN | head -1`) exits 141 and prints nothing."""
    res = _closed_pipe_run(["check", str(oneway)], tmp_path)
    assert res.returncode == 141 and res.stderr == ""


def test_broken_pipe_on_run_keeps_the_written_files(oneway, tmp_path):
    """run into a closed pipe exits 141 quietly; the report files were written in full."""
    out = tmp_path / "out"
    res = _closed_pipe_run(["run", str(oneway), "--out", str(out), "--format", "json,md"], tmp_path)
    assert res.returncode == 141 and res.stderr == ""
    assert sorted(p.name for p in out.iterdir()) == ["report.md", "results.json"]
    assert (out / "results.json").read_bytes().rstrip().endswith(b"}")


def test_broken_pipe_on_an_error_still_reports_it(tmp_path):
    """A closed stdout does not hide an error: it still goes to stderr with exit 2."""
    res = _closed_pipe_run(["check", str(tmp_path / "missing.toml")], tmp_path)
    assert res.returncode == 2 and "the plan file does not exist" in one_line(res.stderr)


# ---------------------------------------------------------------- the crash file


def _crash(monkeypatch, message="boom"):
    def explode(args):
        raise RuntimeError(message)

    monkeypatch.setattr(cli, "_cmd_check", explode)


def _crash_path(line: str) -> Path:
    m = re.search(r"The traceback is in (\S+); please report it", line)
    assert m, line
    return Path(m.group(1))


def test_crash_file_is_new_private_and_named(oneway, tmp_path, monkeypatch, capsys):
    """An internal error exits 3 with one line naming a new, private file holding the traceback;
    two crashes in the same second get two files."""
    monkeypatch.setattr(tempfile, "tempdir", str(tmp_path))
    _crash(monkeypatch)
    paths = []
    for _ in range(2):
        assert main(["check", str(oneway)]) == 3
        line = one_line(capsys.readouterr().err)
        assert "internal error (RuntimeError: boom)" in line
        paths.append(_crash_path(line))
    assert paths[0] != paths[1]
    for p in paths:
        st = os.lstat(p)
        assert p.parent == tmp_path and stat.S_ISREG(st.st_mode) and stat.S_IMODE(st.st_mode) == 0o600
        assert "RuntimeError: boom" in p.read_text()


def test_crash_file_never_follows_a_planted_link(oneway, tmp_path, monkeypatch, capsys):
    """A symbolic link planted at the name the crash file would take is not followed: the file
    it points to stays unchanged and the traceback goes to a fresh file beside it."""
    monkeypatch.setattr(tempfile, "tempdir", str(tmp_path))
    victim = tmp_path / "victim.txt"
    victim.write_text("keep me")
    planted = tmp_path / "anova-report-crash-planted.txt"
    planted.symlink_to(victim)
    names = iter(["planted", "fresh"])
    monkeypatch.setattr(tempfile, "_get_candidate_names", lambda: names)
    _crash(monkeypatch)
    assert main(["check", str(oneway)]) == 3
    path = _crash_path(one_line(capsys.readouterr().err))
    assert path.name == "anova-report-crash-fresh.txt" and not path.is_symlink()
    assert victim.read_text() == "keep me" and planted.is_symlink()


def test_crash_message_is_one_visible_line(oneway, tmp_path, monkeypatch, capsys):
    """An exception text with newlines and terminal escapes is printed on one line, escapes shown."""
    monkeypatch.setattr(tempfile, "tempdir", str(tmp_path))
    _crash(monkeypatch, "first\nsecond \x1b[2J\u202e")
    assert main(["check", str(oneway)]) == 3
    line = one_line(capsys.readouterr().err)
    assert "first second \\u001b[2J\\u202e" in line and "\x1b" not in line


# ---------------------------------------------------------------- user text in figures

NASTY = ("$\\frac{1}{$", "a\\b{c}", "$\\alpha$", "x_1^2 $$", "50% & <b>", "\\$")


def _svg_texts(spec, monkeypatch) -> list[str]:
    """The texts of a drawing, with the glyphs written as text so they can be read back."""
    monkeypatch.setitem(figures._RC, "svg.fonttype", "none")
    svg = figures.draw_svg(spec)
    return [html.unescape(t) for t in re.findall(r"<text\b[^>]*>(.*?)</text>", svg, re.S)]


def test_means_figure_draws_names_literally(monkeypatch):
    """Level names, axis labels and the legend entry of a means figure are drawn as typed."""
    k = len(NASTY)
    spec = FigureSpec("means", (
        ("groups", NASTY), ("means", tuple(float(i) for i in range(k))),
        ("ci_low", tuple(i - 0.5 for i in range(k))), ("ci_high", tuple(i + 0.5 for i in range(k))),
        ("points", tuple((float(i),) for i in range(k))), ("y_label", "$y$ in {mm} \\mu"),
        ("ci_label", "95% $CI$"), ("x_label", "$f$_{1}"),
    ))
    texts = _svg_texts(spec, monkeypatch)
    for name in (*NASTY, "$y$ in {mm} \\mu", "95% $CI$", "$f$_{1}"):
        assert name in texts


def test_interaction_figure_draws_names_literally(monkeypatch):
    """Levels, factor names, trace labels and the legend title of an interaction figure are
    drawn as typed."""
    spec = FigureSpec("interaction", (
        ("x_factor", "$A$"), ("x_levels", ("$a$", "b\\c{")), ("trace_factor", "$B_{x}$"),
        ("traces", (("$t^1$", (1.0, 2.0), (0.5, 1.5), (1.5, 2.5)), ("{t2}", (2.0, 3.0), (1.5, 2.5), (2.5, 3.5)))),
        ("y_label", "$\\y"),
    ))
    texts = _svg_texts(spec, monkeypatch)
    for name in ("$A$", "$a$", "b\\c{", "$B_{x}$", "$t^1$", "{t2}", "$\\y"):
        assert name in texts


def test_residual_figure_shows_hidden_characters(monkeypatch):
    """Control and bidirectional characters in a figure label are drawn as \\uXXXX."""
    spec = FigureSpec("residuals", (("groups", ("pe\u202eat", "a\x1bb")), ("residuals", ((0.1, -0.1), (0.2, -0.2)))))
    texts = _svg_texts(spec, monkeypatch)
    assert "pe\\u202eat" in texts and "a\\u001bb" in texts


def test_characters_the_font_lacks_are_written_as_code_points(monkeypatch):
    """A level name the figure font cannot draw (CJK, a rocket) is drawn as its code points,
    with no missing-glyph warning; letters the font has (Greek, accents) stay as they are."""
    import warnings

    spec = FigureSpec("residuals", (("groups", ("日本\nx", "\U0001F680", "β naïve")),
                                    ("residuals", ((0.1, -0.1), (0.2, -0.2), (0.3, -0.3)))))
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        texts = _svg_texts(spec, monkeypatch)
    assert not [w for w in caught if "Glyph" in str(w.message)]
    assert "\\u65e5\\u672c x" in texts and "\\U0001f680" in texts and "β naïve" in texts


def test_report_with_maths_markup_in_names_is_written(project, tmp_path, capsys):
    """A plan whose level, factor and outcome names hold `$...$` gives a complete HTML report
    (the maths parser would stop at `$\\frac{1}{$`)."""
    data = ONEWAY_DATA.replace("height_mm,medium", "$h_{mm}$,$\\med$").replace("soil", "$\\frac{1}{$")
    plan = (ONEWAY_PLAN.replace('outcome = "height_mm"', 'outcome = "$h_{mm}$"')
            .replace('name = "medium"', "name = '$\\med$'").replace('"soil"', "'$\\frac{1}{$'")
            .replace('effect = "medium"', "effect = '$\\med$'"))
    path = project(plan, {"heights.csv": data})
    code = main(["run", str(path), "--out", str(tmp_path / "out"), "--format", "html"])
    assert code == 0, capsys.readouterr().err
    assert "<svg" in (tmp_path / "out" / "report.html").read_text()


# ---------------------------------------------------------------- control and bidirectional characters


def test_every_hidden_character_is_shown():
    """Every C0/C1 control and every bidirectional formatting character becomes \\uXXXX;
    tab and newline only when asked to be kept; other text is untouched."""
    for cp in (*CONTROLS, *BIDI):
        assert show_controls(f"a{chr(cp)}b") == f"a\\u{cp:04x}b"
    assert re.fullmatch(f"[{HIDDEN_CHARACTERS}]+", "".join(map(chr, (*CONTROLS, *BIDI))))
    assert show_controls("a\tb\nc\rd", keep="\t\n") == "a\tb\nc\\u000dd"
    plain = "Höhe × β, 日本, naïve – ok"
    assert show_controls(plain) == plain


HIDDEN_TITLE = "Tit\\u0000le \\u202e\\u001b[2J\\u0085"
HIDDEN_LEVEL = "pe\u202e\u2066\x1b[31m\x07\x85\u200f\u061c\x7fat"
HIDDEN_HYPOTHESIS = "coir \\u2067beats\\u0008\\u202a bark\\u009b"
# Written out here rather than taken from the module, so that the check stands on its own.
RAW = re.compile("[\x00-\x08\x0b-\x1f\x7f-\x9f\u061c\u200e\u200f\u202a-\u202e\u2066-\u2069]")


@pytest.fixture
def hidden(project):
    toml_level = HIDDEN_LEVEL.encode("unicode_escape").decode("ascii").replace("\\x", "\\u00")
    plan = (ONEWAY_PLAN.replace("Seedling height under four growing media", HIDDEN_TITLE)
            .replace('"peat"', f'"{toml_level}"').replace("coir beats bark", HIDDEN_HYPOTHESIS))
    data = ONEWAY_DATA.replace("peat", f'"{HIDDEN_LEVEL}"')
    return project(plan, {"heights.csv": data})


def _shown(text: str) -> None:
    assert not RAW.search(text), RAW.findall(text)
    for visible in ("Tit\\u0000le \\u202e\\u001b[2J\\u0085",
                    "pe\\u202e\\u2066\\u001b[31m\\u0007\\u0085\\u200f\\u061c\\u007fat",
                    "coir \\u2067beats\\u0008\\u202a bark\\u009b"):
        assert visible in text


def test_hidden_characters_in_html(hidden, tmp_path, capsys):
    """The HTML report shows every hidden character of a title, a level name and a hypothesis
    name as \\uXXXX and contains none of them raw."""
    assert main(["run", str(hidden), "--out", str(tmp_path / "out"), "--format", "html"]) == 0
    _shown(html.unescape((tmp_path / "out" / "report.html").read_text(encoding="utf-8")))


def test_hidden_characters_in_markdown(hidden, tmp_path, capsys):
    """The Markdown report shows them as \\uXXXX (the backslash itself escaped for Markdown)."""
    assert main(["run", str(hidden), "--out", str(tmp_path / "out"), "--format", "md"]) == 0
    text = (tmp_path / "out" / "report.md").read_text(encoding="utf-8")
    _shown(re.sub(r"\\([!-/:-@\[-`{-~])", r"\1", text))  # CommonMark 0.31, 2.4: backslash escapes


def test_hidden_characters_in_the_terminal(hidden, capsys):
    """check prints them as \\uXXXX; so does an error message that quotes a level name."""
    assert main(["check", str(hidden)]) == 0
    _shown(capsys.readouterr().out)
    bad = hidden.read_text().replace('means = "coir > bark"', 'means = "coir > b\u202eark\x1b"'.replace("\x1b", "\\u001b"))
    hidden.write_text(bad)
    assert main(["check", str(hidden)]) == 2
    err = capsys.readouterr().err
    assert "b\\u202eark\\u001b" in err and not RAW.search(err)


# ---------------------------------------------------------------- exit codes, documented alike


def test_exit_codes_are_documented_alike():
    """--help, README.md, DEVELOPERS.md and the command's docstring list the same exit codes,
    and all say that 1 means a check failed (check's data checks, or a difference verify found)."""
    res = subprocess.run([sys.executable, "-m", "reporter", "--help"], capture_output=True, text=True)
    texts = {
        "--help": " ".join(res.stdout.split()),
        "README.md": " ".join((ROOT / "README.md").read_text(encoding="utf-8").split()),
        "DEVELOPERS.md": " ".join((ROOT / "DEVELOPERS.md").read_text(encoding="utf-8").split()),
        "cli docstring": " ".join(cli.__doc__.split()),
    }
    for where, text in texts.items():
        for code, word in ((0, "done"), (1, "a check failed"), (2, "bad input"), (3, "internal error"),
                           (130, "SIGINT"), (143, "SIGTERM"), (141, "broken pipe")):
            assert re.search(rf"\b{code}\b", text) and word in text, (where, code, word)
        assert "verify" in text and "reserved" not in text, where
    assert [c for c, _ in EXIT_CODES] == [0, 1, 2, 3, 130, 143, 141]
