"""A small HTML tree for the report tests (stdlib html.parser), and checks of the tree itself.

The report tests read pages through this parser, the same way a browser tokenises them (the
browser tests then check the real thing in Chromium).
"""
from __future__ import annotations

from html.parser import HTMLParser

VOID = {"area", "base", "br", "col", "embed", "hr", "img", "input", "link", "meta", "source",
        "track", "wbr"}


class Node:
    def __init__(self, tag, attrs, parent=None):
        self.tag, self.attrs, self.parent, self.children = tag, dict(attrs), parent, []

    def iter(self):
        yield self
        for c in self.children:
            if isinstance(c, Node):
                yield from c.iter()

    def find_all(self, tag=None, **attrs):
        out = []
        for n in self.iter():
            if tag is not None and n.tag != tag:
                continue
            if all(_match(n.attrs.get(k.rstrip("_").replace("_", "-")), v) for k, v in attrs.items()):
                out.append(n)
        return out

    def find(self, tag=None, **attrs):
        hits = self.find_all(tag, **attrs)
        return hits[0] if hits else None

    def by_id(self, ident):
        return self.find(id=ident)

    def text(self) -> str:
        parts = []
        for c in self.children:
            parts.append(c.text() if isinstance(c, Node) else c)
        return "".join(parts)

    def classes(self):
        return (self.attrs.get("class") or "").split()


def _match(value, wanted):
    if wanted is True:
        return value is not None
    if callable(wanted):
        return value is not None and wanted(value)
    return value == wanted


class _Builder(HTMLParser):
    def __init__(self):
        super().__init__(convert_charrefs=True)
        self.root = Node("#document", {})
        self.cur = self.root

    def handle_starttag(self, tag, attrs):
        node = Node(tag, attrs, self.cur)
        self.cur.children.append(node)
        if tag not in VOID:
            self.cur = node

    def handle_startendtag(self, tag, attrs):
        self.cur.children.append(Node(tag, attrs, self.cur))

    def handle_endtag(self, tag):
        n = self.cur
        while n is not self.root and n.tag != tag:
            n = n.parent
        if n is not self.root:
            self.cur = n.parent

    def handle_data(self, data):
        self.cur.children.append(data)


def parse(html: str) -> Node:
    b = _Builder()
    b.feed(html)
    b.close()
    return b.root


def test_parser_reads_nesting_entities_and_void_elements():
    root = parse('<div id="a" class="x y"><p>1 &lt;b&gt; &amp; 2<br>3</p><svg><path d="M0"/></svg>'
                 '<input value="&quot;q&quot;"></div><p id="b">after</p>')
    a = root.by_id("a")
    assert a.classes() == ["x", "y"]
    assert a.find("p").text() == "1 <b> & 23"
    assert a.find("path").attrs["d"] == "M0"
    assert a.find("input").attrs["value"] == '"q"'
    assert root.by_id("b").parent is root
    assert [n.tag for n in root.find_all(class_=lambda c: "y" in c.split())] == ["div"]
