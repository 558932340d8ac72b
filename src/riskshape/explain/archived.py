"""The explanation as the archive, the service and the CLI handle it: canonical JSON text.

:func:`explanation_json` is what to store with an alert (inside its hash chain record);
:func:`explanation_text` turns the stored text back into lines for ``riskshape alerts show``;
:func:`explanation_object` gives the JSON object for an API response.
"""

from __future__ import annotations

import json
from typing import TYPE_CHECKING, Any

from riskshape.explain.model import Explanation
from riskshape.explain.text import render_text

if TYPE_CHECKING:  # reading an archived explanation needs neither the monitor nor scipy
    from riskshape.alerts.model import Firing
    from riskshape.compute.monitor import MonitorResult

__all__ = ["explanation_json", "explanation_text", "explanation_object", "NO_EXPLANATION"]

NO_EXPLANATION = "No explanation archived with this alert."


def explanation_json(result: MonitorResult, firing: Firing) -> str:
    """Canonical JSON of the explanation of one firing of a run (store it with the alert).

    Parameters
    ----------
    result : MonitorResult
        The run whose rules fired.
    firing : Firing
        One firing of that run.

    Returns
    -------
    str
        :meth:`Explanation.to_json` of :func:`explain_alert` with the default settings.
    """
    from riskshape.explain.attach import explain_alert

    return explain_alert(result, firing.window_end, firing.summary).to_json()


def explanation_text(stored: str | None) -> str:
    """Plain text of a stored explanation, or :data:`NO_EXPLANATION` when there is none.

    Parameters
    ----------
    stored : str or None
        The JSON text archived with the alert.

    Returns
    -------
    str
        Lines of plain text.

    Raises
    ------
    DataError
        If ``stored`` is not an explanation written by :func:`explanation_json`.

    Examples
    --------
    >>> from datetime import date
    >>> from riskshape.explain.loops import METHOD
    >>> from riskshape.explain.model import Explanation, LoopExplanation
    >>> no_loop = LoopExplanation(date(2031, 3, 3), (), METHOD)
    >>> stored = Explanation("h1_entropy", date(2031, 3, 3), None, no_loop).to_json()
    >>> print(explanation_text(stored))  # doctest: +ELLIPSIS
    Explanation of h1_entropy at the window ending 2031-03-03
    Loops (H1), most persistent first:
      No loop in this window.
      Method: representative cycle from ripser's persistent cocycle: ...
    >>> explanation_text(None) == NO_EXPLANATION, explanation_object(stored)["summary"]
    (True, 'h1_entropy')
    """
    return NO_EXPLANATION if not stored else render_text(Explanation.from_json(stored))


def explanation_object(stored: str | None) -> dict[str, Any] | None:
    """The stored explanation as a JSON object for an API response (None when there is none).

    Parameters
    ----------
    stored : str or None
        The JSON text archived with the alert.

    Returns
    -------
    dict or None
        The explanation as a JSON object.

    Raises
    ------
    DataError
        If ``stored`` is not an explanation written by :func:`explanation_json`.
    """
    if not stored:
        return None
    Explanation.from_json(stored)  # validates the layout
    loaded: dict[str, Any] = json.loads(stored)
    return loaded
