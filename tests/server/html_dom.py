"""A tiny DOM from the standard library's HTML parser, enough to read structure in HTTP tests."""

from dataclasses import dataclass, field
from html.parser import HTMLParser

VOID = {"area", "base", "br", "col", "embed", "hr", "img", "input", "link", "meta", "source", "track", "wbr"}


@dataclass
class Element:
    tag: str
    attrs: dict[str, str]
    parent: "Element | None" = None
    children: list["Element | str"] = field(default_factory=list)

    def text(self) -> str:
        return "".join(c if isinstance(c, str) else c.text() for c in self.children)

    def iter(self):
        yield self
        for c in self.children:
            if isinstance(c, Element):
                yield from c.iter()

    def find_all(self, tag: str | None = None, **attrs: str) -> list["Element"]:
        return [
            e
            for e in self.iter()
            if (tag is None or e.tag == tag) and all(e.attrs.get(k.rstrip("_")) == v for k, v in attrs.items())
        ]

    def find(self, tag: str | None = None, **attrs: str) -> "Element | None":
        found = self.find_all(tag, **attrs)
        return found[0] if found else None

    def by_id(self, element_id: str) -> "Element | None":
        return next((e for e in self.iter() if e.attrs.get("id") == element_id), None)

    def ancestors(self):
        node = self.parent
        while node is not None:
            yield node
            node = node.parent


class _Builder(HTMLParser):
    def __init__(self) -> None:
        super().__init__(convert_charrefs=True)
        self.root = Element("#document", {})
        self.current = self.root

    def handle_starttag(self, tag, attrs):
        element = Element(tag, {k: (v if v is not None else "") for k, v in attrs}, self.current)
        self.current.children.append(element)
        if tag not in VOID:
            self.current = element

    def handle_startendtag(self, tag, attrs):
        self.current.children.append(Element(tag, {k: (v or "") for k, v in attrs}, self.current))

    def handle_endtag(self, tag):
        node = self.current
        while node is not None and node.tag != tag:
            node = node.parent
        if node is not None and node.parent is not None:
            self.current = node.parent

    def handle_data(self, data):
        self.current.children.append(data)


def parse_html(text: str) -> Element:
    builder = _Builder()
    builder.feed(text)
    builder.close()
    return builder.root
