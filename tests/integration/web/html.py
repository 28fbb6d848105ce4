"""A small parsed-HTML helper for the web tests (standard library html.parser; no lxml needed)."""

from __future__ import annotations

from dataclasses import dataclass, field
from html.parser import HTMLParser

VOID = {"area", "base", "br", "col", "embed", "hr", "img", "input", "link", "meta", "source", "track", "wbr"}


@dataclass
class Node:
    tag: str
    attrs: dict[str, str]
    children: list[Node] = field(default_factory=list)
    parent: Node | None = None
    text_parts: list[str] = field(default_factory=list)

    @property
    def text(self) -> str:
        parts: list[str] = []

        def walk(n: Node) -> None:
            parts.extend(n.text_parts)
            for c in n.children:
                walk(c)

        walk(self)
        return " ".join(" ".join(parts).split())

    def iter(self):
        yield self
        for c in self.children:
            yield from c.iter()

    def find_all(self, tag: str | None = None, **attrs: str) -> list[Node]:
        out = []
        for n in self.iter():
            if tag and n.tag != tag:
                continue
            if all(_match(n.attrs.get(k.rstrip("_").replace("_", "-")), v) for k, v in attrs.items()):
                out.append(n)
        return out

    def find(self, tag: str | None = None, **attrs: str) -> Node | None:
        found = self.find_all(tag, **attrs)
        return found[0] if found else None

    def by_id(self, ident: str) -> Node | None:
        return self.find(None, id=ident)


def _match(actual: str | None, wanted: str) -> bool:
    if actual is None:
        return False
    if wanted == "*":
        return True
    return actual == wanted or wanted in actual.split()


class _Parser(HTMLParser):
    def __init__(self) -> None:
        super().__init__(convert_charrefs=True)
        self.root = Node("#root", {})
        self.cur = self.root

    def handle_starttag(self, tag, attrs):  # noqa: ANN001
        node = Node(tag, {k: (v or "") for k, v in attrs}, parent=self.cur)
        self.cur.children.append(node)
        if tag not in VOID:
            self.cur = node

    def handle_startendtag(self, tag, attrs):  # noqa: ANN001
        self.cur.children.append(Node(tag, {k: (v or "") for k, v in attrs}, parent=self.cur))

    def handle_endtag(self, tag):  # noqa: ANN001
        n = self.cur
        while n is not None and n.tag != tag:
            n = n.parent
        if n is not None and n.parent is not None:
            self.cur = n.parent

    def handle_data(self, data):  # noqa: ANN001
        self.cur.text_parts.append(data)


def parse(html: str) -> Node:
    p = _Parser()
    p.feed(html)
    p.close()
    return p.root
