"""Content negotiation: refuse (406) an ``Accept`` that allows none of a path's answers.

Every path, computing or a fixed document (the page, the contract, metrics, problem kinds),
names the media types of its successful answers; a request whose ``Accept`` allows none
of them is refused with a ``not-acceptable`` problem listing them. Problems themselves
(``application/problem+json``) are sent whatever ``Accept`` says (RFC 9110 §12.5.1 lets a
server disregard ``Accept`` rather than refuse), so asking for problems alone asks for no answer the path can
give and is refused like any other unsatisfiable ``Accept``.

Matching (:func:`lagwise.serving.answers.accepts`, shared with the front, which answers
``/healthz`` itself only for an ``Accept`` that allows JSON) follows RFC 9110 §12.5.1 on
type and subtype; parameters other than ``q`` are not compared. No ``Accept`` header
accepts everything.
"""

from __future__ import annotations

from collections.abc import Sequence

from flask import request

from ..serving.answers import accepts
from .problems import Problem


def check_acceptable(produced: Sequence[str]) -> None:
    """Refuse the current request (406) when its ``Accept`` allows none of ``produced``.

    Parameters
    ----------
    produced : sequence of str
        The media types of the path's successful answers, preferred first.

    Raises
    ------
    Problem
        ``not-acceptable``, listing ``produced`` in ``acceptable``.
    """
    if accepts(request.headers.get("Accept"), produced):
        return
    listed = ", ".join(produced)
    raise Problem(
        "not-acceptable",
        f"Accept: {request.headers['Accept'][:200]} allows none of the media types {request.path} answers with: {listed} "
        "(problems are sent as application/problem+json whatever Accept says).",
        acceptable=list(produced),
    )
