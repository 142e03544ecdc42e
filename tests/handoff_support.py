"""Helpers for the hand-off tests: a strict-enough HTML outline parser and the browser setup."""

from __future__ import annotations

import shutil
from html.parser import HTMLParser

VOID = {"area", "base", "br", "col", "embed", "hr", "img", "input", "link", "meta", "source", "track", "wbr"}

#: Flags for Debian's chromium in a container (see DEVELOPERS.md, browser tests).
CHROME_ARGS = ["--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
               "--disable-background-networking", "--disable-component-update", "--disable-sync"]


def chromium_path() -> str | None:
    return shutil.which("chromium")


class Outline(HTMLParser):
    """Parse a page, check that every element is closed in order, collect text per section id."""

    def __init__(self) -> None:
        super().__init__(convert_charrefs=True)
        self.stack: list[tuple[str, str | None]] = []
        self.errors: list[str] = []
        self.sections: dict[str, list[str]] = {}
        self.text: list[str] = []
        self.tags: dict[str, int] = {}
        self.svg_in: dict[str, int] = {}

    def handle_starttag(self, tag: str, attrs: list[tuple[str, str | None]]) -> None:
        self.tags[tag] = self.tags.get(tag, 0) + 1
        ident = dict(attrs).get("id") if tag == "section" else None
        if tag == "svg":
            for sid in self._open_sections():
                self.svg_in[sid] = self.svg_in.get(sid, 0) + 1
        if tag not in VOID:
            self.stack.append((tag, ident))
        if ident:
            self.sections[ident] = []

    def handle_startendtag(self, tag: str, attrs: list[tuple[str, str | None]]) -> None:
        self.tags[tag] = self.tags.get(tag, 0) + 1

    def handle_endtag(self, tag: str) -> None:
        if tag in VOID:
            return
        if not self.stack or self.stack[-1][0] != tag:
            self.errors.append(f"</{tag}> closes {self.stack[-1][0] if self.stack else 'nothing'}")
            return
        self.stack.pop()

    def _open_sections(self) -> list[str]:
        return [i for t, i in self.stack if i]

    def handle_data(self, data: str) -> None:
        self.text.append(data)
        for sid in self._open_sections():
            self.sections[sid].append(data)

    def section_text(self, ident: str) -> str:
        return " ".join(" ".join(self.sections[ident]).split())

    def all_text(self) -> str:
        return " ".join(" ".join(self.text).split())


def outline(page: str) -> Outline:
    parser = Outline()
    parser.feed(page)
    parser.close()
    if parser.stack:
        parser.errors.append(f"unclosed elements: {[t for t, _ in parser.stack]}")
    return parser
