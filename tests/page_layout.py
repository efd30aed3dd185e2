"""Pages as WeasyPrint lays them out: how full each is, and whether a heading stays with what it introduces.

The rule of issue 21 (item 7): no page is less than a third full but the cover and the last page of a
section; a heading is never left at a page's foot with its table or picture overleaf (common practice in
print layout, no source).
"""

from __future__ import annotations


def layout(html_text: str):
    """Each page of a rendered HTML page as (fill, found): how far down its content reaches (0 to 1 of the
    page's content height) and, in document order, every text or picture box with its ancestors' (tag, element)."""
    from explain.present.report_pages import render_document

    def walk(box, ancestors):
        tag = getattr(box, "element_tag", None)
        if type(box).__name__ in ("TextBox", "InlineReplacedBox", "BlockReplacedBox"):
            yield box, ancestors
        for child in getattr(box, "children", ()):
            yield from walk(child, ancestors + ((tag, getattr(box, "element", None)),))

    pages = []
    for page in render_document(html_text, "2026-05-28T00:00:00+00:00").pages:
        box = page._page_box  # WeasyPrint's laid-out page (its content area and boxes)
        found = list(walk(box.children[0], ()))
        bottom = max((b.position_y + b.margin_height() for b, _ in found), default=box.content_box_y())
        pages.append(((bottom - box.content_box_y()) / box.height, found))
    return pages


def check_pages(html_text: str, headings: bool = True) -> list[float]:
    """Assert the rule on a rendered HTML page (``headings``: the heading rule too); return each page's fill."""
    pages = layout(html_text)
    starts_section = [any(tag == "h2" for tag, _ in found[0][1]) if found else False for _, found in pages]
    fills = [round(fill, 2) for fill, _ in pages]
    for i, (fill, _) in enumerate(pages):
        ends_section = i + 1 == len(pages) or starts_section[i + 1]
        assert i == 0 or ends_section or fill >= 1 / 3, (i + 1, fills)
    if not headings:
        return fills
    # a heading stays with the table or picture it introduces: never at a page's foot with its table overleaf
    first_page = {}
    for number, (_, found) in enumerate(pages):
        for box, ancestors in found:
            for tag, element in ancestors:
                first_page.setdefault(id(element), (number, tag))
    order = sorted(first_page.items(), key=lambda item: item[1][0])  # stable: document order within a page
    heading = None
    for key, (number, tag) in order:
        if tag in ("h2", "h3", "h4"):
            heading = (number, tag)
        elif tag in ("table", "figure") and heading is not None:
            assert number == heading[0], (heading, tag, number + 1, fills)
            heading = None
    return fills
