"""SVG files as XML: parsed safely, with the line of every element, in any encoding.

defusedxml's parser refuses entity declarations (internal ones can expand a few bytes into
gigabytes; external ones can read other files into the drawing) and external references before
anything is expanded. expat reads UTF-8, UTF-16 and the single-byte encodings itself; UTF-32
and multi-byte legacy encodings are decoded here first, so that every encoding meets the same
refusal. Elements without a namespace (a file with no ``xmlns``) are put into the SVG namespace,
as every SVG viewer reads them.
"""

from __future__ import annotations

import codecs
import re

from .errors import InputError

__all__ = ["SVG_NS", "XLINK_NS", "XML_NS", "SvgTree", "element_label", "element_name",
           "local_name", "parse_svg_bytes"]

SVG_NS = "http://www.w3.org/2000/svg"
XLINK_NS = "http://www.w3.org/1999/xlink"
XML_NS = "http://www.w3.org/XML/1998/namespace"
_DECLARED = re.compile(rb"""^<\?xml[^>]*?encoding\s*=\s*["']([A-Za-z0-9._-]+)["']""")


class SvgTree:
    """A parsed SVG document: its root element (ElementTree, tags as ``{namespace}name``), the
    source line of every element and the file's name for messages.

    Examples
    --------
    >>> t = parse_svg_bytes(b'<svg xmlns="http://www.w3.org/2000/svg">\\n<rect id="a"/></svg>',
    ...                     "a.svg")
    >>> element_name(t.root[0], t.lines)
    "<rect id='a'> on line 2"
    """

    __slots__ = ("root", "lines", "name")

    def __init__(self, root, lines: dict, name: str):
        self.root, self.lines, self.name = root, lines, name


def local_name(tag) -> str:
    """The tag without its namespace ("" for comments and processing instructions).

    Examples
    --------
    >>> local_name("{http://www.w3.org/2000/svg}rect")
    'rect'
    """
    return tag.rsplit("}", 1)[-1] if isinstance(tag, str) else ""


def element_label(el) -> str:
    """The short name strokes carry: ``<rect id='frame'>``, or ``<rect>`` without an id.

    Examples
    --------
    >>> import xml.etree.ElementTree as ET
    >>> element_label(ET.fromstring('<rect id="frame"/>')), element_label(ET.Element("g"))
    ("<rect id='frame'>", '<g>')
    """
    ident = el.get("id")
    tag = local_name(el.tag)
    return f"<{tag} id={ident!r}>" if ident else f"<{tag}>"


def element_name(el, lines: dict) -> str:
    """The element for messages: tag, id and source line.

    Examples
    --------
    >>> import xml.etree.ElementTree as ET
    >>> el = ET.Element("circle")
    >>> element_name(el, {el: 7})
    '<circle> on line 7'
    """
    line = lines.get(el)
    return element_label(el) + (f" on line {line}" if line else "")


def _decoded(data: bytes) -> bytes | str:
    """The document as expat can read it: bytes for the encodings expat knows, else text."""
    head = data[:4]
    for bom, enc in ((codecs.BOM_UTF32_LE, "utf-32"), (codecs.BOM_UTF32_BE, "utf-32"),
                     (b"<\0\0\0", "utf-32-le"), (b"\0\0\0<", "utf-32-be")):
        if head.startswith(bom):
            return data.decode(enc)
    m = _DECLARED.match(data)
    if m:
        name = m.group(1).decode("ascii")
        try:
            info = codecs.lookup(name)
        except LookupError:
            raise InputError(f"the XML declaration names an unknown encoding {name!r}") from None
        if info.name not in ("utf-8", "utf-16", "utf-16-le", "utf-16-be", "latin-1", "ascii",
                             "iso8859-1") and not _single_byte(info.name):
            return data.decode(info.name)
    return data


def _single_byte(codec: str) -> bool:
    try:
        return len(bytes(range(256)).decode(codec, errors="strict")) == 256
    except (UnicodeDecodeError, LookupError):
        return False


def parse_svg_bytes(data: bytes, name: str) -> SvgTree:
    """Parse an SVG document safely.

    Parameters
    ----------
    data : bytes
        The file's content.
    name : str
        The file, for messages.

    Returns
    -------
    SvgTree

    Raises
    ------
    InputError
        Not well-formed XML, an entity declaration or external reference (refused, never
        expanded), an unknown encoding, or a root element other than ``<svg>``.

    Examples
    --------
    >>> bomb = ('<?xml version="1.0" encoding="UTF-16"?><!DOCTYPE svg [<!ENTITY a "aaaa">]>'
    ...         '<svg xmlns="http://www.w3.org/2000/svg">&a;</svg>').encode("utf-16")
    >>> try:
    ...     parse_svg_bytes(bomb, "bomb.svg")
    ... except InputError as exc:
    ...     str(exc)[:56]
    "bomb.svg: refusing the XML entity declaration 'a': entit"
    """
    import xml.etree.ElementTree as ET

    from defusedxml import DefusedXmlException, EntitiesForbidden, ExternalReferenceForbidden
    from defusedxml.ElementTree import DefusedXMLParser

    class _LineParser(DefusedXMLParser):
        def _start(self, tag, attr_list):                 # expat's position is the start tag's
            el = super()._start(tag, attr_list)
            lines[el] = self.parser.CurrentLineNumber
            return el

    lines: dict = {}
    try:
        text = _decoded(data)
    except UnicodeDecodeError as exc:
        raise InputError(f"{name}: not readable in its encoding ({exc.reason} at byte "
                         f"{exc.start})") from None
    parser = _LineParser(target=ET.TreeBuilder(), forbid_dtd=False, forbid_entities=True,
                         forbid_external=True)
    try:
        parser.feed(text)
        root = parser.close()
    except EntitiesForbidden as exc:
        kind = "external entity" if exc.sysid or exc.pubid else "entity"
        raise InputError(f"{name}: refusing the XML {kind} declaration {exc.name!r}: entities "
                         "are never expanded (a hostile file can use them to fill the memory "
                         "or to read other files)") from None
    except ExternalReferenceForbidden as exc:
        raise InputError(f"{name}: refusing an external XML reference "
                         f"({exc.sysid or exc.pubid!r}): other files are never read") from None
    except DefusedXmlException as exc:
        raise InputError(f"{name}: refusing the XML ({type(exc).__name__})") from None
    except ET.ParseError as exc:
        raise InputError(f"{name}: not well-formed XML ({exc})") from None
    except (ValueError, LookupError) as exc:       # an encoding expat will not take
        raise InputError(f"{name}: cannot read the XML ({exc})") from None
    if local_name(root.tag) != "svg":
        raise InputError(f"{name}: not an SVG file (the root element is "
                         f"<{local_name(root.tag)}>)")
    if not root.tag.startswith("{"):
        for el in root.iter():
            if isinstance(el.tag, str) and not el.tag.startswith("{"):
                el.tag = f"{{{SVG_NS}}}{el.tag}"
    elif root.tag != f"{{{SVG_NS}}}svg":
        ns = root.tag[1:].split("}")[0]
        raise InputError(f"{name}: the root <svg> is in the namespace {ns!r}, not SVG's "
                         f"({SVG_NS})")
    return SvgTree(root, lines, name)
