"""Bad input through the command line: one clear line on stderr, exit status 2, no traceback,
no output file and no stray temporary file left in the folder."""

from __future__ import annotations

from pathlib import Path

import pytest

from render_helpers import files_in, run_cli, svg_text

SVG_FILES = {
    "truncated.svg": '<svg xmlns="http://www.w3.org/2000/svg"><path d="M 0 0 L 10',
    "not-xml.svg": "this is not XML at all { }",
    "html.svg": "<html><body><p>hello</p></body></html>",
    # entity expansion ("billion laughs") and an external entity: refused, never expanded
    "laughs.svg": ('<?xml version="1.0"?>\n<!DOCTYPE lolz [<!ENTITY lol "lol">'
                   '<!ENTITY lol2 "&lol;&lol;&lol;&lol;&lol;&lol;&lol;&lol;&lol;&lol;">'
                   '<!ENTITY lol3 "&lol2;&lol2;&lol2;&lol2;&lol2;&lol2;&lol2;&lol2;">]>\n'
                   '<svg xmlns="http://www.w3.org/2000/svg"><text>&lol3;</text>'
                   '<line x1="0" y1="0" x2="9" y2="9"/></svg>'),
    "xxe.svg": ('<?xml version="1.0"?>\n<!DOCTYPE svg [<!ENTITY xxe SYSTEM "file:///etc/passwd">]>'
                '\n<svg xmlns="http://www.w3.org/2000/svg"><text>&xxe;</text>'
                '<line x1="0" y1="0" x2="9" y2="9"/></svg>'),
    "empty.svg": svg_text(""),
    "only-groups.svg": svg_text("<g><g><title>nothing here</title></g></g>"),
    "only-text.svg": svg_text('<text x="1" y="1">   </text><text x="5" y="5"/>'),
    "nan-path.svg": svg_text('<path d="M 0 0 L nan 5"/>'),
    "nan-line.svg": svg_text('<line x1="0" y1="0" x2="NaN" y2="5"/>'),
    "nan-circle.svg": svg_text('<circle cx="5" cy="5" r="nan"/>'),
    "huge.svg": svg_text('<path d="M 0 0 L 1e300 5"/>'),
    "overflow.svg": svg_text('<path d="M 0 0 L 1e400 5"/>'),
    "huge-transform.svg": svg_text('<g transform="scale(1e300)"><line x1="0" y1="0" x2="5e300" '
                                   'y2="5"/></g>'),
    "unknown-command.svg": svg_text('<path d="M 0 0 X 50 50"/>'),
    "bad-number.svg": svg_text('<rect width="abc" height="3"/>'),
    "zero-viewbox.svg": svg_text('<line x1="3" y1="3" x2="5" y2="3"/>', attrs='viewBox="0 0 0 0"'),
    "bad-viewbox.svg": svg_text('<line x1="3" y1="3" x2="5" y2="3"/>', attrs='viewBox="a b c d"'),
    "off-screen.svg": svg_text('<line x1="500" y1="500" x2="600" y2="500"/>',
                               attrs='viewBox="0 0 100 80"'),
}

BINARY = bytes(range(256)) * 8


def check_failed(out, folder: Path, before: set[str], what: str = ""):
    __tracebackhide__ = True
    lines = out.stderr.strip().splitlines()
    assert out.returncode == 2, f"{what}: exit {out.returncode}, stderr {out.stderr!r}"
    assert "Traceback" not in out.stderr, out.stderr
    assert len(lines) == 1, f"{what}: expected one stderr line, got {lines!r}"
    assert lines[0].startswith("vectorgen: error: "), lines[0]
    # an error the engine foresaw, not the catch-all for an unexpected exception
    assert "VECTORGEN_DEBUG" not in lines[0], lines[0]
    assert files_in(folder) == before, f"{what}: left {files_in(folder) - before}"


@pytest.fixture
def workdir(tmp_path):
    for name, text in SVG_FILES.items():
        (tmp_path / name).write_text(text, encoding="utf-8")
    (tmp_path / "binary.svg").write_bytes(BINARY)
    (tmp_path / "folder.svg").mkdir()
    good = tmp_path / "good.svg"
    good.write_text(svg_text('<rect x="10" y="10" width="80" height="60"/>'))
    return tmp_path


@pytest.mark.parametrize("name", sorted(SVG_FILES) + ["binary.svg", "folder.svg", "missing.svg"])
@pytest.mark.parametrize("command,out_name", [("render", "out.wav"), ("preview", "out.png")])
def test_bad_svg(workdir, name, command, out_name):
    before = files_in(workdir)
    out = run_cli(command, name, "-o", out_name, cwd=workdir)
    check_failed(out, workdir, before, name)


def test_the_hostile_entities_are_named(workdir):
    out = run_cli("render", "laughs.svg", "-o", "o.wav", cwd=workdir)
    assert "entity" in out.stderr.lower()
    out = run_cli("render", "xxe.svg", "-o", "o.wav", cwd=workdir)
    assert "entity" in out.stderr.lower()
    assert "root:" not in out.stderr           # /etc/passwd never read into the message


def test_messages_say_what_is_wrong(workdir):
    expect = {"missing.svg": "not found", "empty.svg": "nothing drawable",
              "only-text.svg": "nothing drawable", "huge.svg": "enormous", "nan-path.svg": "'n'",
              "unknown-command.svg": "'X'", "truncated.svg": "XML",
              "off-screen.svg": "outside", "zero-viewbox.svg": "viewBox"}
    for name, words in expect.items():
        out = run_cli("render", name, "-o", "o.wav", cwd=workdir)
        assert words in out.stderr, (name, out.stderr)


BAD_ARGS = [
    (["--shape", "star"], "unknown shape"),
    (["--shape", "grid", "--rate", "0"], "sample rate"),
    (["--shape", "grid", "--rate", "-48000"], "sample rate"),
    (["--shape", "grid", "--rate", "abc"], "--rate"),
    (["--shape", "grid", "--rate", "1e9"], "--rate"),
    (["--shape", "grid", "--channels", "5"], "--channels"),
    (["--shape", "grid", "--samples", "0"], "samples"),
    (["--shape", "grid", "--samples", "40"], "too short"),
    (["--shape", "grid", "--refresh", "0"], "refresh"),
    (["--shape", "grid", "--refresh", "nan"], "refresh"),
    (["--shape", "grid", "--speed", "-1"], "speed"),
    (["--shape", "grid", "--speed", "1e-9"], "samples"),
    (["--shape", "grid", "--speed", "100", "--refresh", "50"], "only one"),
    (["--shape", "grid", "--seconds", "0"], "--seconds"),
    (["--shape", "grid", "--seconds", "inf"], "--seconds"),
    (["--shape", "grid", "--tolerance", "0"], "--tolerance"),
    (["--shape", "grid", "--grid-step", "-5"], "grid step"),
    (["--shape", "grid", "--grid-step", "1e-9"], "crossings"),
    (["--shape", "circle", "--radius", "-1"], "--radius"),
    (["--shape", "circle", "--radius", "1e300"], "finite number"),
    (["--shape", "clock", "--time", "25:00"], "--time"),
    (["--text", "caf\u00e9"], "ASCII"),
    (["--text", ""], "nothing to draw"),
    (["--text", "hi", "--text-height", "nan"], "height"),
    (["--text", "hi", "--shape", "grid"], "one source"),
    ([], "no source"),
    (["drawing.txt"], ".svg"),
    (["--shape", "grid", "--profile", "nowhere.toml"], "not found"),
]


@pytest.mark.parametrize("args,words", BAD_ARGS, ids=[" ".join(a) or "none" for a, _w in BAD_ARGS])
def test_bad_arguments(tmp_path, args, words):
    (tmp_path / "drawing.txt").write_text("hello")
    before = files_in(tmp_path)
    out = run_cli("render", *args, "-o", "out.wav", "--report", "r.json", cwd=tmp_path)
    check_failed(out, tmp_path, before, " ".join(args))
    assert words in out.stderr


def test_profile_with_a_bad_key(tmp_path):
    (tmp_path / "tube.toml").write_text("[beam]\nwriting_sped_mm_per_s = 20000.0\n")
    before = files_in(tmp_path)
    for command, out_name in (("render", "o.wav"), ("preview", "o.png")):
        out = run_cli(command, "--shape", "grid", "--profile", "tube.toml", "-o", out_name,
                      cwd=tmp_path)
        check_failed(out, tmp_path, before, command)
        assert "writing_sped_mm_per_s" in out.stderr


@pytest.mark.parametrize("target", ["no/such/folder/out.wav", "out.mp3", "out", "sub"])
def test_bad_output_paths(tmp_path, target):
    (tmp_path / "sub").mkdir()
    before = files_in(tmp_path)
    out = run_cli("render", "--shape", "grid", "-o", target, cwd=tmp_path)
    check_failed(out, tmp_path, before, target)
    assert not (tmp_path / "no").exists()


@pytest.mark.parametrize("extra", [["--report", "missing/r.json"], ["--report", "r.txt"],
                                   ["--preview", "missing/p.png"], ["--preview", "p.jpg"]])
def test_bad_side_outputs_stop_before_any_file_is_written(tmp_path, extra):
    before = files_in(tmp_path)
    out = run_cli("render", "--shape", "grid", "-o", "out.wav", *extra, cwd=tmp_path)
    check_failed(out, tmp_path, before, " ".join(extra))


def test_preview_bad_options(tmp_path):
    before = files_in(tmp_path)
    for args in (["-o", "p.wav"], ["-o", "p.png", "--width", "5"], ["-o", "p.png", "--spot", "0"],
                 ["-o", "missing/p.png"], ["-o", "p.png", "--signals", "s.svg"]):
        out = run_cli("preview", "--shape", "grid", *args, cwd=tmp_path)
        check_failed(out, tmp_path, before, " ".join(args))


def test_beyond_full_scale_leaves_nothing(tmp_path):
    (tmp_path / "narrow.toml").write_text("[deflection]\nmatrix_mm = [[20.0, 0.0], [0.0, 20.0]]\n")
    before = files_in(tmp_path)
    out = run_cli("render", "--shape", "grid", "--profile", "narrow.toml", "-o", "o.wav",
                  "--report", "o.json", "--preview", "o.png", cwd=tmp_path)
    check_failed(out, tmp_path, before, "full scale")
    assert "full scale" in out.stderr


def test_an_existing_output_survives_a_failed_render(tmp_path):
    """A failed render must not touch the file it would have replaced."""
    (tmp_path / "o.wav").write_bytes(b"previous take")
    out = run_cli("render", "--shape", "grid", "--rate", "0", "-o", "o.wav", cwd=tmp_path)
    assert out.returncode == 2
    assert (tmp_path / "o.wav").read_bytes() == b"previous take"


def test_a_good_render_in_the_same_folder_works(workdir):
    """The fixture's folder is usable: the failures above are the inputs, not the folder."""
    out = run_cli("render", "good.svg", "-o", "good.wav", "-q", cwd=workdir)
    assert out.returncode == 0, out.stderr
    assert (workdir / "good.wav").stat().st_size > 44
    assert not [n for n in files_in(workdir) if n.startswith(".vectorgen-")]
