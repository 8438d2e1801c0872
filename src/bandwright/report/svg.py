"""An SVG document as an element inside HTML (``report.html`` and the sections it includes)."""

from __future__ import annotations

import re

__all__ = ["svg_inline"]


def svg_inline(svg: bytes, prefix: str) -> str:
    """An SVG document as an element inside HTML: no XML prolog or DOCTYPE, and every id
    prefixed so that several inline drawings cannot collide.

    Parameters
    ----------
    svg : bytes
    prefix : str
        Letters, digits and "-" only.
    """
    text = svg.decode("utf-8")
    text = re.sub(r"<\?xml[^>]*\?>\s*", "", text)
    text = re.sub(r"<!DOCTYPE[^>]*>\s*", "", text)
    text = re.sub(r"<!--.*?-->", "", text, flags=re.S)
    ids = set(re.findall(r'\bid="([^"]+)"', text))
    if ids:
        pattern = re.compile(r'(\bid="|#)(' + "|".join(re.escape(i) for i in
                                                      sorted(ids, key=len, reverse=True))
                             + r')(?=["\)])')
        text = pattern.sub(lambda m: f"{m.group(1)}{prefix}-{m.group(2)}", text)
    return text
