"""SVG styling as the specifications define it: the CSS cascade (presentation attributes,
style sheets, the style attribute, !important), inheritance, display, visibility, opacity and
what "drawn" means for a filled or stroked shape.

Outside references, named beside each check: CSS 2.1 (6.2 inheritance, 6.4.1 cascading order,
6.4.2 !important, 6.4.3 specificity), CSS Style Attributes (3), SVG 1.1 (11.5 display and
visibility, 14.5 opacity, the property index for what inherits, 5.6 <use> inheritance) and
SVG 2 (6.8 presentation attributes). Each expected value is worked out by hand from those
rules; resvg's agreement on the same rules is in test_svg_resvg.py.
"""

from __future__ import annotations

import numpy as np
import pytest

from render_helpers import write_svg
from vectorgen.errors import InputError, VectorgenWarning
from vectorgen.profile import Profile
from vectorgen.svgsource import svg_to_strokes

SCREEN = Profile().screen


def strokes_of(tmp_path, body, **kw):
    return svg_to_strokes(write_svg(tmp_path, body, **kw), SCREEN, fit="off")


def brightness(tmp_path, body) -> dict:
    s = strokes_of(tmp_path, body)
    return dict(zip(s.labels, s.intensity.tolist()))


LINE = 'x1="10" y1="10" x2="20" y2="10"'


@pytest.mark.parametrize("sheet,attrs,expected,rule", [
    ("rect, line { stroke-opacity: .9 } .c { stroke-opacity: .5 }", 'class="c"', 0.5,
     "CSS 2.1 6.4.3: a class (0,1,0) beats a type selector (0,0,1)"),
    ("#x { stroke-opacity: .3 } line.c.d { stroke-opacity: .5 }", 'class="c d"', 0.3,
     "CSS 2.1 6.4.3: one id (1,0,0) beats two classes and a type (0,2,1)"),
    ("g > line { stroke-opacity: .4 } line { stroke-opacity: .8 }", '', 0.4,
     "CSS 2.1 6.4.3: g > line (0,0,2) beats line (0,0,1) though it comes first"),
    (".c { stroke-opacity: .4 } .c { stroke-opacity: .6 }", 'class="c"', 0.6,
     "CSS 2.1 6.4.1 (4): equal specificity, the later declaration wins"),
    ("#x { stroke-opacity: .3 }", 'style="stroke-opacity: .7"', 0.7,
     "CSS Style Attributes 3 / CSS 2.1 6.4.3: the style attribute beats an id"),
    ("line { stroke-opacity: .2 !important }", 'style="stroke-opacity: .7"', 0.2,
     "CSS 2.1 6.4.2: an !important sheet declaration beats a normal style attribute"),
    ("line { stroke-opacity: .2 !important }", 'style="stroke-opacity: .7 !important"', 0.7,
     "CSS 2.1 6.4.2: !important in the style attribute beats !important in a sheet"),
    ("* { stroke-opacity: .6 }", 'stroke-opacity=".1"', 0.6,
     "SVG 2 6.8: a presentation attribute has specificity 0 and comes before every sheet"),
    ("", 'stroke-opacity=".1" style="stroke-opacity:.35"', 0.35,
     "the style attribute beats the presentation attribute"),
    ("", 'style="/* a comment; */ stroke-opacity : 45% ; stroke: \'x\'"', 0.45,
     "CSS Syntax 3: comments inside a style attribute; CSS Color 4: an opacity percentage"),
])
def test_cascade_decides_the_stroke_opacity(tmp_path, sheet, attrs, expected, rule):
    body = f'<style>{sheet}</style><g><line id="x" {attrs} {LINE}/></g>'
    assert brightness(tmp_path, body)["<line id='x'>"] == pytest.approx(expected), rule


def test_inherited_and_not_inherited_properties(tmp_path):
    body = ('<style>.dim { stroke-opacity: .5 } .faint { opacity: .5 }</style>'
            '<g class="dim"><line id="inherits" ' + LINE + '/>'
            '<line id="overrides" stroke-opacity=".8" ' + LINE + '/></g>'
            '<g class="faint"><g><line id="in-faint" ' + LINE + '/></g>'
            '<line id="reset" opacity="1" ' + LINE + '/></g>'
            '<g stroke-opacity=".5"><g stroke-opacity="inherit"><line id="kw" ' + LINE +
            '/></g></g>')
    got = brightness(tmp_path, body)
    # SVG 1.1 property index: stroke-opacity inherits (a child may set its own)
    assert got["<line id='inherits'>"] == pytest.approx(0.5)
    assert got["<line id='overrides'>"] == pytest.approx(0.8)
    # SVG 1.1 14.5: opacity does not inherit but the group's applies to all it contains,
    # however deep; a child's opacity="1" cannot undo it (product 0.5 x 1)
    assert got["<line id='in-faint'>"] == pytest.approx(0.5)
    assert got["<line id='reset'>"] == pytest.approx(0.5)
    # CSS 2.1 6.2.1: 'inherit' takes the parent's value
    assert got["<line id='kw'>"] == pytest.approx(0.5)


def test_group_and_element_opacities_multiply_with_stroke_opacity(tmp_path):
    body = ('<g opacity="0.8"><g style="opacity:0.5"><line id="a" opacity="0.5" '
            'stroke-opacity="0.5" stroke="black" ' + LINE + '/></g></g>')
    # SVG 1.1 14.5: 0.8 x 0.5 x 0.5 (object opacities) x 0.5 (stroke-opacity)
    assert brightness(tmp_path, body)["<line id='a'>"] == pytest.approx(0.1)


def test_display_none_removes_the_subtree_whatever_the_children_say(tmp_path):
    body = ('<style>.hidden { display: none } #layer3 { display: none }</style>'
            '<g style="display:none"><line id="a" style="display:inline" ' + LINE + '/></g>'
            '<g class="hidden"><g><line id="b" ' + LINE + '/></g></g>'
            '<g id="layer3"><line id="c" ' + LINE + '/></g>'
            '<g display="none"><line id="d" ' + LINE + '/></g>'
            '<line id="kept" ' + LINE + '/>')
    # SVG 1.1 11.5: display:none on a container: it and all its descendants are not rendered,
    # even those that set display themselves
    assert set(brightness(tmp_path, body)) == {"<line id='kept'>"}


def test_control_display_on_a_child_alone_does_not_hide_its_siblings(tmp_path):
    body = ('<g><line id="gone" display="none" ' + LINE + '/><line id="kept" ' + LINE +
            '/></g>')
    assert set(brightness(tmp_path, body)) == {"<line id='kept'>"}


def test_visibility_inherits_and_a_child_may_show_itself(tmp_path):
    body = ('<style>.ghost { visibility: hidden }</style>'
            '<g class="ghost"><line id="hidden" ' + LINE + '/>'
            '<line id="shown" visibility="visible" ' + LINE + '/>'
            '<g><line id="deep" ' + LINE + '/></g></g>'
            '<line id="collapsed" style="visibility:collapse" ' + LINE + '/>')
    # SVG 1.1 11.5: visibility inherits; 'visible' on a descendant shows it; collapse = hidden
    assert set(brightness(tmp_path, body)) == {"<line id='shown'>"}


def test_filled_only_shapes_draw_their_outline_and_unpainted_ones_nothing(tmp_path):
    body = ('<rect id="filled" x="10" y="10" width="20" height="10" stroke="none" '
            'fill="#fff" fill-opacity="0.6"/>'
            '<rect id="stroked" x="40" y="10" width="20" height="10" fill="none" stroke="red" '
            'fill-opacity="0.1"/>'
            '<rect id="nothing" x="70" y="10" width="20" height="10" fill="none" stroke="none"/>'
            '<rect id="transparent" x="70" y="40" width="20" height="10" fill="transparent"/>')
    got = brightness(tmp_path, body)
    # a vector display draws outlines: a filled shape gives its outline, as bright as its
    # fill (fill-opacity); a stroked one as its stroke; a shape painted by neither, nothing
    # (SVG 1.1 11.2-11.4: fill and stroke none paint nothing)
    assert got == {"<rect id='filled'>": pytest.approx(0.6), "<rect id='stroked'>": 1.0}


def test_use_instances_inherit_from_the_use_and_match_selectors_in_place(tmp_path):
    body = ('<style>#lib > .mark { stroke-opacity: .5 }</style>'
            '<defs><g id="lib"><line id="m" class="mark" ' + LINE + '/></g>'
            '<line id="plain" ' + LINE + '/></defs>'
            '<use href="#m" y="5"/>'
            '<use href="#plain" y="10" stroke-opacity="0.25"/>'
            '<g opacity="0.5"><use href="#plain" y="20"/></g>')
    s = strokes_of(tmp_path, body)
    got = sorted(zip(s.labels, np.round(s.intensity, 12)))
    # SVG 1.1 5.6: an instance inherits from its <use> as a deep clone would; style sheet
    # selectors match the referenced element where it stands (#lib > .mark)
    assert got == [("<line id='m'> in <use>", 0.5), ("<line id='plain'> in <use>", 0.25),
                   ("<line id='plain'> in <use>", 0.5)]


def test_font_shorthand_and_font_size_units(tmp_path):
    # CSS 2.1 15.8: the font shorthand sets the size; 1em of that size sets a length
    body = ('<g style="font: italic 10px serif"><line id="a" x1="0" y1="1" x2="2em" y2="1"/>'
            '</g><g font-size="8"><g font-size="150%"><line id="b" x1="0" y1="2" x2="1em" '
            'y2="2"/></g></g><line id="c" x1="0" y1="3" x2="2ex" y2="3" font-size="5"/>')
    s = strokes_of(tmp_path, body)
    lengths = dict(zip(s.labels, s.lengths().round(9)))
    assert lengths == {"<line id='a'>": 20.0, "<line id='b'>": 12.0, "<line id='c'>": 5.0}


def test_a_bad_value_in_a_sheet_names_the_element_the_property_and_the_rule(tmp_path):
    body = '<style>.d { stroke-opacity: half }</style><line id="x" class="d" ' + LINE + '/>'
    with pytest.raises(InputError) as err:
        strokes_of(tmp_path, body)
    msg = str(err.value)
    assert "<line id='x'> on line 3" in msg and "stroke-opacity" in msg and ".d" in msg
    assert "\n" not in msg


def test_a_selector_css_cannot_read_is_left_out_with_a_warning(tmp_path):
    body = ('<style>line:unknown-pseudo(3) { stroke-opacity: .1 } line { stroke-opacity: .5 }'
            '</style><line id="x" ' + LINE + '/>')
    with pytest.warns(VectorgenWarning, match="selector"):
        got = brightness(tmp_path, body)
    # CSS Syntax 3 / Selectors: a rule with an invalid selector is dropped, the rest applies
    assert got["<line id='x'>"] == pytest.approx(0.5)
