"""Escaping user text for HTML and SVG (XML): the one home of that rule.

Entry point: :func:`escape`.
"""

from __future__ import annotations

import re

__all__ = ["escape"]

#: Characters neither XML 1.0 nor HTML can hold (C0 controls but tab, line
#: feed and carriage return; DEL; lone surrogates; U+FFFE and U+FFFF).
_INVALID_SET = "\x00-\x08\x0b\x0c\x0e-\x1f\x7f\ud800-\udfff\ufffe\uffff"
_INVALID = re.compile(f"[{_INVALID_SET}]")
#: Any character :func:`escape` changes: the invalid ones and the five markup characters.
_CHANGED = re.compile(f"[&<>\"'{_INVALID_SET}]")


def escape(text: object) -> str:
    """``text`` safe inside an element or a quoted attribute; characters markup cannot hold become U+FFFD.

    >>> escape('<b a="1">&\\'</b>\\x00')
    '&lt;b a=&quot;1&quot;&gt;&amp;&#39;&lt;/b&gt;\\ufffd'
    """
    s = str(text)
    if not _CHANGED.search(s):  # the common case (refs, values, net names): one scan, no copies
        return s
    s = _INVALID.sub("\ufffd", s)
    return (
        s.replace("&", "&amp;").replace("<", "&lt;").replace(">", "&gt;")
        .replace('"', "&quot;").replace("'", "&#39;")
    )
