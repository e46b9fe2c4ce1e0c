"""<text> drawn in the single-stroke font: position, font size, text-anchor, <tspan> positions,
white space, transforms, brightness; what cannot be drawn is reported.

Outside references: SVG 1.1 10.4 and SVG 2 11.10.1 (the first character's start at x, y on
the baseline; an absolute x or y starts a new text chunk; text-anchor shifts a chunk by all,
half or none of its advance), SVG 1.1 10.5 (x, y, dx, dy lists, one value per character,
the innermost element's value first), SVG 1.1 10.15 (white space: newlines removed, tabs to
spaces, runs of spaces collapsed, leading and trailing ones stripped; xml:space="preserve"),
and the font itself (`shapes.text`: its glyphs and advance widths, independent of the SVG
reader) placed by hand. The cap height is 0.7 em (common practice, no source).
"""

from __future__ import annotations

import numpy as np
import pytest

from render_helpers import run_cli, write_svg
from shapes.text import text_strokes, text_width
from vectorgen import sources
from vectorgen.errors import InputError, VectorgenWarning
from vectorgen.profile import Profile
from vectorgen.registry import Registry
from vectorgen.svgsource import svg_to_strokes

SCREEN = Profile().screen
CAP_PER_EM = 0.7


def strokes_of(tmp_path, body, **kw):
    return svg_to_strokes(write_svg(tmp_path, body, **kw), SCREEN, fit="off")


def expected_ink(text, x, y, size, anchor="start"):
    """The font's own strokes for `text` set by hand: advance box from x (start), centred on x
    (middle) or ending at x (end), baseline at y; SVG user units (fit off: mm, page centred)."""
    cap = size * CAP_PER_EM
    w = text_width(text, cap)
    left = {"start": x, "middle": x - w / 2, "end": x - w}[anchor]
    # text_strokes centres a one-line block: box [cx - w/2, cx + w/2], baseline cy - cap/2
    ref = text_strokes(text, cap, "left", (left + w / 2 - 50.0, (40.0 - y) + cap / 2))
    return ref.points


@pytest.mark.parametrize("anchor", ["start", "middle", "end"])
def test_text_sits_on_its_baseline_at_x_with_its_anchor(tmp_path, anchor):
    s = strokes_of(tmp_path, f'<text x="40" y="30" font-size="10" text-anchor="{anchor}">'
                             'Hi there</text>')
    np.testing.assert_allclose(s.points, expected_ink("Hi there", 40, 30, 10, anchor),
                               atol=1e-9)


def test_control_the_anchors_differ_by_the_advance(tmp_path):
    start = expected_ink("Hi there", 40, 30, 10, "start")
    end = expected_ink("Hi there", 40, 30, 10, "end")
    assert np.allclose(start[:, 0] - end[:, 0], text_width("Hi there", 7.0))


def test_tspans_carry_on_shift_and_start_new_chunks(tmp_path):
    body = ('<text x="10" y="30" font-size="10">A<tspan dx="5">B</tspan>'
            '<tspan x="60" y="50" font-size="5" text-anchor="end">C</tspan></text>')
    s = strokes_of(tmp_path, body)
    wa = text_width("A", 7.0)
    ref = np.concatenate([expected_ink("A", 10, 30, 10), expected_ink("B", 10 + wa + 5, 30, 10),
                          expected_ink("C", 60, 50, 5, "end")])
    np.testing.assert_allclose(s.points, ref, atol=1e-9)


def test_a_list_of_x_places_each_character(tmp_path):
    s = strokes_of(tmp_path, '<text x="10 30 50" y="20" font-size="10">abcd</text>')
    ref = np.concatenate([expected_ink("a", 10, 20, 10), expected_ink("b", 30, 20, 10),
                          expected_ink("cd", 50, 20, 10)])
    np.testing.assert_allclose(s.points, ref, atol=1e-9)


def test_white_space_collapses_unless_preserved(tmp_path):
    collapsed = strokes_of(tmp_path, '<text x="10" y="20">  two\n\t   words  </text>')
    np.testing.assert_allclose(collapsed.points, expected_ink("two words", 10, 20, 16),
                               atol=1e-9)
    kept = strokes_of(tmp_path, '<text x="10" y="20" xml:space="preserve">  a</text>')
    np.testing.assert_allclose(kept.points, expected_ink("  a", 10, 20, 16), atol=1e-9)


def test_text_follows_its_transform_and_font_size_units(tmp_path):
    s = strokes_of(tmp_path, '<g transform="translate(50 40) rotate(90)"><text x="0" y="0" '
                             'font-size="9pt">up</text></g>')
    ref = expected_ink("up", 0, 0, 12, "start")           # 9 pt = 12 px (CSS Values 6.2)
    # rotate(90) about the page centre (50, 40): SVG (u, v) -> (50 - v, 40 + u)
    u, v = ref[:, 0] + 50.0, 40.0 - ref[:, 1]
    np.testing.assert_allclose(s.points, np.column_stack([50 - v - 50.0, 40.0 - (40 + u)]),
                               atol=1e-9)


def test_text_brightness_and_hidden_runs(tmp_path):
    body = ('<text x="10" y="20" fill-opacity="0.5">a<tspan visibility="hidden">b</tspan>'
            '<tspan opacity="0.5">c</tspan></text>')
    s = strokes_of(tmp_path, body)
    wa, wb = text_width("a", 16 * CAP_PER_EM), text_width("b", 16 * CAP_PER_EM)
    ref_c = expected_ink("c", 10 + wa + wb, 20, 16)
    n_a = len(expected_ink("a", 10, 20, 16))
    np.testing.assert_allclose(s.points[n_a:], ref_c, atol=1e-9)        # b kept its space
    assert sorted(set(np.round(s.intensity, 12))) == [0.25, 0.5]


def test_font_family_is_reported_once(tmp_path):
    body = ('<text x="10" y="20" font-family="Arial">a</text>'
            '<text x="10" y="40" style="font-family: Arial">b</text>')
    with pytest.warns(VectorgenWarning, match="font-family Arial is not used") as got:
        strokes_of(tmp_path, body)
    assert sum("font-family" in str(w.message) for w in got) == 1


def test_characters_the_font_lacks_are_drawn_as_question_marks(tmp_path):
    with pytest.warns(VectorgenWarning, match="'\\?'"):
        s = strokes_of(tmp_path, '<text id="t" x="10" y="20">caf\u00e9</text>')
    np.testing.assert_allclose(s.points, expected_ink("caf?", 10, 20, 16), atol=1e-9)


def test_without_a_stroke_font_text_is_reported_and_not_drawn(tmp_path, monkeypatch):
    monkeypatch.setattr(sources, "STROKE_FONTS", Registry("stroke font"))
    body = '<line x1="0" y1="0" x2="10" y2="0"/><text x="5" y="5">hi</text><text>there</text>'
    with pytest.warns(VectorgenWarning, match="2 <text> element"):
        s = strokes_of(tmp_path, body)
    assert s.count == 1
    with pytest.raises(InputError, match="<text>"):
        strokes_of(tmp_path, '<text x="5" y="5">only words</text>')


def test_the_command_line_draws_text(tmp_path):
    path = write_svg(tmp_path, '<text x="50" y="45" text-anchor="middle" font-size="12" '
                               'font-family="Helvetica">HELLO</text>')
    out = run_cli("render", path, "-o", tmp_path / "out.wav")
    assert out.returncode == 0, out.stderr
    assert "Helvetica" in out.stderr                    # the unused font is named
    assert (tmp_path / "out.wav").stat().st_size > 44
