"""The CSS cascade for SVG documents: presentation attributes, ``style=""`` and ``<style>``
sheets, ranked as CSS ranks them.

Selectors are matched by cssselect2 and sheets tokenised by tinycss2. For each element the
cascade gives its *declared* values, one per property: the winning declaration among

  1. presentation attributes (``stroke-opacity="0.5"``): author origin, specificity 0, before
     every sheet (SVG 2, 6.8: presentation attributes);
  2. rules of the ``<style>`` sheets, by selector specificity, then by order in the document
     (CSS 2.1, 6.4.1 and 6.4.3);
  3. the ``style`` attribute, which outranks every selector (CSS 2.1, 6.4.3: specificity
     a = 1; CSS Style Attributes, 3);

with every ``!important`` declaration above every normal one, the style attribute again
outranking the sheets (CSS 2.1, 6.4.2). Inheritance is the document walker's job: it knows the
element's parent in the rendered tree, which for a ``<use>`` instance is the ``<use>``.
"""

from __future__ import annotations

import re

__all__ = ["Cascade", "Declared", "INHERITED", "PROPERTIES", "parse_declarations"]

# property -> (inherited, initial value) (SVG 1.1 property index, SVG 2 and CSS Masking 1)
PROPERTIES = {
    "display": (False, "inline"),
    "visibility": (True, "visible"),
    "opacity": (False, "1"),
    "fill": (True, "black"),
    "fill-opacity": (True, "1"),
    "fill-rule": (True, "nonzero"),
    "stroke": (True, "none"),
    "stroke-opacity": (True, "1"),
    "stroke-dasharray": (True, "none"),
    "stroke-dashoffset": (True, "0"),
    "stroke-linecap": (True, "butt"),
    "clip-path": (False, "none"),
    "clip-rule": (True, "nonzero"),
    "mask": (False, "none"),
    "overflow": (False, "visible"),
    "filter": (False, "none"),
    "font-size": (True, "medium"),
    "font-family": (True, ""),
    "text-anchor": (True, "start"),
    "marker-start": (True, "none"),
    "marker-mid": (True, "none"),
    "marker-end": (True, "none"),
}
INHERITED = frozenset(k for k, (inh, _v) in PROPERTIES.items() if inh)
# Declarations with nothing that needs a tokenizer: plain "name: value" pairs.
_NEEDS_TOKENIZER = re.compile(r"""["'()\\{}]|/\*""")


class Declared:
    """A declared value and where it came from (for messages)."""

    __slots__ = ("value", "origin")

    def __init__(self, value: str, origin: str):
        self.value, self.origin = value, origin

    def __repr__(self) -> str:
        return f"Declared({self.value!r}, {self.origin!r})"


def parse_declarations(text: str) -> list[tuple[str, str, bool]]:
    """A declaration list (a ``style`` attribute, a rule's body) as (name, value, important),
    names in lower case, in order; declarations CSS would drop (no colon, empty value) are left
    out.

    Notes
    -----
    CSS Syntax 3, 5.4.5 (consume a list of declarations); the common case, plain
    ``name:value;`` pairs with no quotes, brackets, escapes or comments, is split directly,
    which gives the same result without the tokenizer's cost.

    Examples
    --------
    >>> parse_declarations("fill:none; stroke-opacity: .5 !important")
    [('fill', 'none', False), ('stroke-opacity', '.5', True)]
    """
    if not _NEEDS_TOKENIZER.search(text):
        out = []
        for part in text.split(";"):
            name, colon, value = part.partition(":")
            name, value = name.strip().lower(), value.strip()
            if not colon or not name or not value:
                continue
            important = False
            if "!" in value:
                head, _bang, tail = value.rpartition("!")
                if tail.strip().lower() == "important":
                    value, important = head.strip(), True
            if value:
                out.append((name, value, important))
        return out
    import tinycss2

    out = []
    for decl in tinycss2.parse_declaration_list(text, skip_whitespace=True, skip_comments=True):
        if decl.type == "declaration":
            value = tinycss2.serialize(decl.value).strip()
            if value:
                out.append((decl.lower_name, value, bool(decl.important)))
    return out


class Cascade:
    """Declared values of the elements of one document.

    Parameters
    ----------
    root : Element
        The document's root (ElementTree), tags in the SVG namespace.
    sheets : list of str
        The text of its ``<style>`` elements, in document order.
    warn : callable
        ``warn(message)`` for rules left out (a selector cssselect2 cannot read, an at-rule).

    Examples
    --------
    >>> import xml.etree.ElementTree as ET
    >>> root = ET.fromstring('<svg xmlns="http://www.w3.org/2000/svg"><rect class="a" '
    ...                      'stroke-opacity="1" style="opacity:.5"/></svg>')
    >>> c = Cascade(root, [".a { stroke-opacity: .2 } rect { stroke-opacity: .9 }"], print)
    >>> d = c.declared(root[0])
    >>> d["stroke-opacity"].value, d["opacity"].value
    ('.2', '.5')
    """

    def __init__(self, root, sheets: list[str], warn):
        self._matches: dict = {}
        self._alike: dict = {}
        self._styles: dict = {}
        css = "\n".join(s for s in sheets if s and s.strip())
        if css:
            self._match_all(root, css, warn)

    def _match_all(self, root, css: str, warn) -> None:
        import cssselect2
        import tinycss2

        matcher = cssselect2.Matcher()
        order = 0
        for rule in tinycss2.parse_stylesheet(css, skip_whitespace=True, skip_comments=True):
            if rule.type == "at-rule":
                warn(f"the CSS at-rule @{rule.lower_at_keyword} in a <style> sheet is ignored")
                continue
            if rule.type != "qualified-rule":
                continue                    # a parse error: CSS drops it (CSS Syntax 3, 5.4.3)
            prelude = tinycss2.serialize(rule.prelude).strip()
            decls = _longhands(parse_declarations(tinycss2.serialize(rule.content)))
            try:
                selectors = cssselect2.compile_selector_list(rule.prelude)
            except cssselect2.SelectorError as exc:
                why = ": ".join(str(a) for a in (exc.args[0] if exc.args and isinstance(
                    exc.args[0], tuple) else exc.args))
                warn(f"the CSS rule {prelude!r} in a <style> sheet is ignored: its selector "
                     f"cannot be read ({why})")
                continue
            if not decls:
                continue
            for sel in selectors:
                if sel.pseudo_element is None:
                    order += 1
                    matcher.add_selector(sel, (order, f"rule {prelude!r} in <style>", decls))
        wrapper = cssselect2.ElementWrapper.from_xml_root(root)
        for w in wrapper.iter_subtree():
            found = matcher.match(w)
            if found:
                self._matches[w.etree_element] = [(spec, payload) for spec, _o, _p, payload
                                                  in found]

    def declared(self, el) -> dict[str, Declared]:
        """The winning declaration of each property declared on `el` (none for the rest).
        (The result may be shared with other elements declared alike: read it only.)"""
        attrs = tuple((k, v) for k, v in el.attrib.items() if k in PROPERTIES)
        style = el.get("style") or ""
        matches = self._matches.get(el)
        if matches is None:                 # no sheet rule: alike elements, alike values
            key = (attrs, style)
            got = self._alike.get(key)
            if got is None:
                got = self._alike[key] = self._rank(attrs, (), style)
            return got
        return self._rank(attrs, matches, style)

    def _rank(self, attrs: tuple, matches, style: str) -> dict[str, Declared]:
        ranked: dict[str, tuple] = {}
        for name, value in attrs:
            value = value.strip()
            if value:
                ranked[name] = (_ATTRIBUTE_RANK, value, "attribute")
        for spec, (order, origin, decls) in matches:
            for name, value, important in decls:
                rank = (important, 1, spec, order)
                old = ranked.get(name)
                if old is None or rank >= old[0]:       # later equal-rank declarations win
                    ranked[name] = (rank, value, origin)
        if style:
            decls = self._styles.get(style)
            if decls is None:
                decls = self._styles[style] = _longhands(parse_declarations(style))
            for name, value, important in decls:
                rank = (important, 2, (0, 0, 0), 0)
                old = ranked.get(name)
                if old is None or rank >= old[0]:
                    ranked[name] = (rank, value, "style attribute")
        return {name: Declared(value, origin) for name, (_r, value, origin) in ranked.items()}


_ATTRIBUTE_RANK = (0, 0, (0, 0, 0), 0)


def _longhands(decls) -> list[tuple[str, str, int]]:
    """Declarations of the properties read here, shorthands expanded, as (name, value,
    important)."""
    out = []
    for name, value, important in decls:
        if name in ("marker", "font"):
            out.extend((sub, v, int(important)) for sub, v in _expand_shorthand(name, value))
        elif name in PROPERTIES:
            out.append((name, value, int(important)))
    return out


def _expand_shorthand(name: str, value: str) -> list[tuple[str, str]]:
    """The longhands a shorthand sets: ``marker`` sets all three markers (SVG 1.1, 11.6.2);
    ``font`` sets the font size and family (CSS 2.1, 15.8: the size is the token before the
    family list, optionally with ``/line-height``)."""
    if name == "marker":
        return [("marker-start", value), ("marker-mid", value), ("marker-end", value)]
    words = value.split()
    for i, w in enumerate(words):
        size = w.split("/", 1)[0]
        if re.match(r"^[+-]?(?:\d+\.?\d*|\.\d+)", size) or size.lower() in (
                "xx-small", "x-small", "small", "medium", "large", "x-large", "xx-large",
                "larger", "smaller"):
            if size[:1].isdigit() or size[:1] in ".+-" or i < len(words) - 1:
                return [("font-size", size), ("font-family", " ".join(words[i + 1:]))]
    return []
