"""How a token is shown to a person: white space at its edges made visible.

Character n-grams carry padding and white space (``"ns. "``, ``" dep"``); printed
as they are, two different tokens look the same. The terminal presenters show
spaces at a token's edges as "␣" and line breaks and tabs as escapes. Files
(JSON, CSV) keep the token exactly.
"""

from __future__ import annotations

_ESCAPES = str.maketrans({"\n": "\\n", "\r": "\\r", "\t": "\\t"})


def shown(token: str) -> str:
    """``token`` for a terminal or picture: exact, but with invisible characters visible."""
    token = str(token)
    if token != token.strip() or any(ch in token for ch in "\n\r\t"):
        return token.translate(_ESCAPES).replace(" ", "␣")
    return token
