"""Rendering the console's pages: the Jinja2 templates shipped in the package, escaped by default.

Every page answers with a Content-Security-Policy that allows nothing from outside the service
(no inline script, no other origin), is never cached, and may not be framed.
"""

from __future__ import annotations

import math
from typing import Any

from jinja2 import Environment, PackageLoader, StrictUndefined, select_autoescape
from starlette.responses import HTMLResponse

from riskshape import CAUTION
from riskshape_service.console.session import Session

__all__ = ["PAGE_HEADERS", "render", "number", "counted"]

PAGE_HEADERS = {
    "Content-Security-Policy": (
        "default-src 'self'; script-src 'self'; style-src 'self'; img-src 'self' data:; "
        "form-action 'self'; frame-ancestors 'none'; base-uri 'none'"
    ),
    "Cache-Control": "no-store",
    "X-Content-Type-Options": "nosniff",
    "Referrer-Policy": "no-referrer",
}


def number(value: object, digits: int = 4) -> str:
    """A value for reading: ``digits`` significant digits, ``n/a`` when missing."""
    if value is None:
        return "n/a"
    try:
        x = float(value)  # type: ignore[arg-type]
    except (TypeError, ValueError):
        return str(value)
    return "n/a" if not math.isfinite(x) else f"{x:.{digits}g}"


def counted(n: object, word: str, plural: str | None = None) -> str:
    """A count and its noun in the right form: ``1 review``, ``3 reviews``, ``0 alerts match``.

    Parameters
    ----------
    n : int or sized
        The count (or a collection, whose length is counted).
    word : str
        The noun for one.
    plural : str, optional
        The noun for any other count (default ``word`` + "s").

    Returns
    -------
    str
    """
    count = len(n) if isinstance(n, (list, tuple, dict, set, frozenset)) else int(n)  # type: ignore[call-overload]
    return f"{count} {word if count == 1 else (plural or word + 's')}"


_environment = Environment(
    loader=PackageLoader("riskshape_service", "console/templates"),
    autoescape=select_autoescape(["html"]),
    undefined=StrictUndefined,
    trim_blocks=True,
    lstrip_blocks=True,
)
_environment.filters["number"] = number
_environment.filters["counted"] = counted


def render(
    template: str, session: Session | None, *, status_code: int = 200, title: str = "", **values: Any
) -> HTMLResponse:
    """One page: ``template`` filled with ``values``, the signed-in person and the caution.

    Parameters
    ----------
    template : str
        File name under ``console/templates``.
    session : Session or None
        Who is signed in (None on the sign-in page).
    status_code : int
        HTTP status of the answer.
    title : str
        The page's title (also its first heading).
    **values
        What the template reads.

    Returns
    -------
    starlette.responses.HTMLResponse
    """
    text = _environment.get_template(template).render(session=session, caution=CAUTION, title=title, **values)
    return HTMLResponse(text, status_code=status_code, headers=PAGE_HEADERS)
