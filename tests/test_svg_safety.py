"""Reading SVG safely and saying what is wrong: entity declarations refused in every encoding,
values SVG ignores (an invalid transform, a negative radius) ignored with a warning naming the
element, and every unreadable value or broken reference one line on the command line naming
the element (tag, id, line) and the attribute, exit status 2, no output file.

Outside references: XML 1.0 4.2 and Appendix F (entity declarations; encodings known from the
byte order mark or the first bytes: UTF-8, UTF-16 and UTF-32 in both byte orders), the
"billion laughs" expansion attack (common practice, no source), SVG 2 6.8 / CSS Transforms 1
(an invalid presentation attribute, transform included, is ignored; resvg, checked here,
does the same), SVG 2 10.2-10.4 (a negative width, height or r is invalid; the initial value
0 disables rendering; a negative rx is auto), SVG 1.1 5.3.1 (what is inside <defs> is not
rendered directly).
"""

from __future__ import annotations

import numpy as np
import pytest

from render_helpers import files_in, resvg_alpha, run_cli, svg_text, write_svg
from vectorgen.errors import InputError, VectorgenWarning
from vectorgen.profile import Profile
from vectorgen.svgsource import svg_to_strokes

SCREEN = Profile().screen
LAUGHS = ('<?xml version="1.0" encoding="{enc}"?>\n<!DOCTYPE svg [<!ENTITY lol "lol">'
          '<!ENTITY lol2 "&lol;&lol;&lol;&lol;&lol;&lol;&lol;&lol;">]>\n'
          '<svg xmlns="http://www.w3.org/2000/svg"><text>&lol2;</text>'
          '<line x1="0" y1="0" x2="9" y2="9"/></svg>')
PLAIN = ('<?xml version="1.0" encoding="{enc}"?>\n<svg xmlns="http://www.w3.org/2000/svg" '
         'viewBox="0 0 100 80"><circle cx="50" cy="40" r="20"/>'
         '<line x1="0" y1="0" x2="90" y2="70"/></svg>')
# (Python codec, the name in the XML declaration)
ENCODINGS = [("utf-8", "UTF-8"), ("utf-16", "UTF-16"), ("utf-16-be", "UTF-16"),
             ("utf-32", "UTF-32"), ("utf-32-le", "UTF-32"), ("utf-32-be", "UTF-32")]


def check_one_line_error(out, folder, before, *words):
    __tracebackhide__ = True
    lines = out.stderr.strip().splitlines()
    assert out.returncode == 2, out.stderr
    assert len(lines) == 1 and lines[0].startswith("vectorgen: error: "), lines
    assert "Traceback" not in out.stderr and "VECTORGEN_DEBUG" not in out.stderr
    for w in words:
        assert w in lines[0], (w, lines[0])
    assert files_in(folder) == before, files_in(folder) - before


@pytest.mark.parametrize("codec,declared", ENCODINGS, ids=[c for c, _d in ENCODINGS])
def test_entity_declarations_are_refused_in_every_encoding(tmp_path, codec, declared):
    (tmp_path / "laughs.svg").write_bytes(LAUGHS.format(enc=declared).encode(codec))
    before = files_in(tmp_path)
    out = run_cli("render", "laughs.svg", "-o", "o.wav", cwd=tmp_path)
    check_one_line_error(out, tmp_path, before, "entity", "'lol'")


def test_an_external_entity_is_refused_without_reading_it(tmp_path):
    doc = ('<?xml version="1.0" encoding="UTF-32"?>\n<!DOCTYPE svg [<!ENTITY xxe SYSTEM '
           '"file:///etc/passwd">]>\n<svg xmlns="http://www.w3.org/2000/svg"><text>&xxe;</text>'
           '</svg>')
    (tmp_path / "xxe.svg").write_bytes(doc.encode("utf-32"))
    before = files_in(tmp_path)
    out = run_cli("render", "xxe.svg", "-o", "o.wav", cwd=tmp_path)
    check_one_line_error(out, tmp_path, before, "external entity", "'xxe'")
    assert "root:" not in out.stderr


@pytest.mark.parametrize("codec,declared", ENCODINGS + [("latin-1", "ISO-8859-1"),
                                                         ("shift_jis", "Shift_JIS")])
def test_every_encoding_reads_the_drawing(tmp_path, codec, declared):
    path = tmp_path / f"{codec}.svg"
    path.write_bytes(PLAIN.format(enc=declared).encode(codec))
    got = svg_to_strokes(str(path), SCREEN, fit="off", tolerance_mm=0.01)
    # fit off on the 100 x 80 viewBox: the line from (0, 0) to (90, 70) and the circle
    # r = 20 about the page centre, worked out by hand
    lines = [p for p in got if len(p) == 2]
    np.testing.assert_allclose(lines[0], [(-50, 40), (40, -30)], atol=1e-12)
    circle = [p for p in got if len(p) > 2][0]
    r = np.hypot(*circle.T)
    assert r.max() <= 20 + 1e-9 and r.min() >= 20 - 0.01 * (1 + 1e-9)


def test_a_standard_doctype_without_entities_is_read(tmp_path):
    doc = ('<?xml version="1.0"?>\n<!DOCTYPE svg PUBLIC "-//W3C//DTD SVG 1.1//EN" '
           '"http://www.w3.org/Graphics/SVG/1.1/DTD/svg11.dtd">\n'
           + svg_text('<line x2="5"/>').split("\n", 1)[1])
    (tmp_path / "d.svg").write_text(doc)
    assert svg_to_strokes(str(tmp_path / "d.svg"), SCREEN).count == 1


# --- values SVG ignores ------------------------------------------------------------------------

@pytest.mark.parametrize("transform", ["translate(NaN,0)", "scale(inf)", "scale(",
                                       "translate(20 20) scale(", "rotate(45) bogus"])
def test_invalid_transforms_are_ignored_with_a_warning_naming_the_element(tmp_path, transform):
    line = '<line x1="10" y1="10" x2="30" y2="10" stroke="black" stroke-width="2"/>'
    body = f'<g id="grp" transform="{transform}">{line}</g>'
    with pytest.warns(VectorgenWarning, match=r"<g id='grp'> on line 3 has transform=") as w:
        got = svg_to_strokes(write_svg(tmp_path, body), SCREEN, fit="off")
    assert "ignores" in str(w[0].message)
    # drawn as if not there: (10, 10) - (30, 10) with fit off on the 100 x 80 viewBox
    np.testing.assert_allclose(got.stroke(0), [(-40, 30), (-20, 30)], atol=1e-12)
    # resvg draws it in the same place (as with no transform)
    alpha = resvg_alpha(svg_text(body, attrs='width="100" height="80" viewBox="0 0 100 80"'),
                        100)
    rows, cols = np.nonzero(alpha > 0.5)
    assert (cols.min(), cols.max(), rows.min(), rows.max()) == (10, 29, 9, 10)


def test_control_a_valid_transform_moves_the_drawing(tmp_path):
    body = '<g transform="translate(20 20)"><line x1="10" y1="10" x2="30" y2="10"/></g>'
    got = svg_to_strokes(write_svg(tmp_path, body), SCREEN, fit="off")
    np.testing.assert_allclose(got.stroke(0), [(-20, 10), (0, 10)])


@pytest.mark.parametrize("shape,attr", [('<circle id="s" cx="5" cy="5" r="-2"/>', "r"),
                                        ('<rect id="s" width="-5" height="3"/>', "width"),
                                        ('<ellipse id="s" rx="3" ry="-1"/>', "ry")])
def test_negative_sizes_are_not_drawn_with_a_warning(tmp_path, shape, attr):
    body = shape + '<line x1="0" y1="0" x2="5" y2="0"/>'
    with pytest.warns(VectorgenWarning, match=f"id='s'.*{attr}"):
        s = svg_to_strokes(write_svg(tmp_path, body), SCREEN, fit="off")
    if attr == "ry":        # SVG 2 10.4: a negative ry is auto: it takes rx, a circle r = 3
        assert s.count == 2
    else:
        assert s.count == 1


def test_a_negative_corner_radius_is_auto(tmp_path):
    body = '<rect id="s" x="0" y="0" width="20" height="10" rx="-3" ry="2"/>'
    with pytest.warns(VectorgenWarning, match="negative rx"):
        s = svg_to_strokes(write_svg(tmp_path, body), SCREEN, fit="off", tolerance_mm=0.001)
    # rx auto takes ry = 2 (SVG 2 10.2): straight sides 2 (20 - 4) + 2 (10 - 4) and four
    # quarter circles r = 2 (the chords a hair short of the arcs)
    expected = 2 * 16 + 2 * 6 + 2 * np.pi * 2
    assert s.total_length() == pytest.approx(expected, rel=1e-4)
    assert s.total_length() <= expected


def test_deep_nesting_is_refused(tmp_path):
    body = "<g>" * 300 + '<line x2="5"/>' + "</g>" * 300
    with pytest.raises(InputError, match="nested more than"):
        svg_to_strokes(write_svg(tmp_path, body), SCREEN)


def test_path_data_that_is_never_drawn_is_no_error(tmp_path):
    """SVG 1.1, 5.3.1: what is inside <defs> is not rendered directly; so its path data is
    only read when a <use> draws it, and a fault in it is an error only then."""
    good = '<path d="M 10 10 H 60"/><path d="M 10 20 H 60"/>'
    unused = '<defs><path id="p" d="M 0 0 L 10 x"/></defs>'
    s = svg_to_strokes(write_svg(tmp_path, unused + good), SCREEN, fit="off")
    assert s.count == 2 and s.total_length() == pytest.approx(100.0)   # 2 x 50 by hand
    # control: the same path drawn through a <use> is the error, naming it and the character
    with pytest.raises(InputError, match=r"<path id='p'> on line 3 has d=.*character 12"):
        svg_to_strokes(write_svg(tmp_path, unused + good + '<use href="#p"/>'), SCREEN)


# --- the command line: one line naming the element and the attribute ---------------------------

BAD = {
    "unit.svg": ('<rect id="r" x="1cm" y="2 mm" width="5" height="5"/>', "<rect id='r'>", "y="),
    "unit2.svg": ('<circle id="c" cx="5" cy="5" r="20pxx"/>', "<circle id='c'>", "r="),
    "em.svg": ('<line id="l" x2="5em5"/>', "<line id='l'>", "x2="),
    "points.svg": ('<polygon id="p" points="0,0 10,a"/>', "<polygon id='p'>", "points="),
    "path.svg": ('<path id="d" d="M 0 0 L 10 10 Q 5"/>', "<path id='d'>", "d="),
    "opacity.svg": ('<g id="g" opacity="lots"><line x2="5"/></g>', "<g id='g'>", "opacity"),
    "dash.svg": ('<line id="l" x2="5" stroke="red" stroke-dasharray="4 x"/>', "<line id='l'>",
                 "stroke-dasharray"),
    "text.svg": ('<text id="t" x="1zz">a</text>', "<text id='t'>", "x="),
    "viewbox.svg": ('<svg id="in" viewBox="0 0 a b"><line x2="5"/></svg>', "<svg id='in'>",
                    "viewBox"),
    "use.svg": ('<use id="u" href="#missing"/>', "<use id='u'>", "'missing'"),
    "cycle.svg": ('<g id="g1"><use id="u1" href="#g1"/></g>', "<use id='u1'>", "cycle"),
    "clip.svg": ('<circle id="c" r="5" clip-path="url(#nope)"/>', "<circle id='c'>",
                 "clip-path"),
    "notclip.svg": ('<rect id="x" width="1" height="1"/><circle id="c" r="5" '
                    'clip-path="url(#x)"/>', "<circle id='c'>", "not a <clipPath>"),
    "mask.svg": ('<line id="l" x2="5" mask="url(#m2)"/>', "<line id='l'>", "mask"),
    "clip-cycle.svg": ('<clipPath id="a" clip-path="url(#b)"><rect width="9" height="9"/>'
                       '</clipPath><clipPath id="b"><rect id="r" width="9" height="9" '
                       'clip-path="url(#a)"/></clipPath><line x2="5" clip-path="url(#a)"/>',
                       "<rect id='r'>", "cycle"),
}


@pytest.mark.parametrize("name", sorted(BAD))
def test_bad_values_and_references_are_one_line_naming_the_element(tmp_path, name):
    body, element, attr = BAD[name]
    (tmp_path / name).write_text(svg_text(body))
    before = files_in(tmp_path)
    out = run_cli("render", name, "-o", "out.wav", "--preview", "p.png", cwd=tmp_path)
    check_one_line_error(out, tmp_path, before, element, "on line 3", attr)
