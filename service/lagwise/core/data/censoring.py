"""Values below a laboratory detection limit (left-censored values).

A censored sample carries its detection limit instead of a measured value. Policies:
``half_limit`` (default, common practice: half the limit), ``limit`` (the limit itself),
``zero``, or ``reject`` (refuse the request, naming the samples). The substituted values
then take part like any other; the count and the policy are reported.
"""

from __future__ import annotations

from collections.abc import Callable

import numpy as np

from ..errors import FieldIssue, InvalidInput

CENSORING_POLICIES = ("half_limit", "limit", "zero", "reject")
_FACTOR = {"half_limit": 0.5, "limit": 1.0, "zero": 0.0}


def substitute(
    values: np.ndarray,
    censored: np.ndarray | None,
    limits: np.ndarray | None,
    policy: str,
    pointer_for: Callable[[str, int | None], str],
) -> tuple[np.ndarray, int]:
    """Values with censored entries replaced per ``policy``, and how many were censored.

    Parameters
    ----------
    values : ndarray
        Measured values (entries at censored positions are ignored).
    censored : ndarray of bool or None
        True where the result is below its detection limit.
    limits : ndarray or None
        Detection limits (value units); needed at every censored position.
    """
    if policy not in CENSORING_POLICIES:
        raise InvalidInput.at("/censoring", f"must be one of {', '.join(CENSORING_POLICIES)}")
    if censored is None:
        if limits is not None:
            raise InvalidInput.at(
                pointer_for("censored", None),
                "detection_limits need the censored flags that say which samples they apply to",
            )
        return values, 0
    if censored.size != values.size:
        raise InvalidInput.at(
            pointer_for("censored", None), f"has {censored.size} entries but values has {values.size}"
        )
    flagged = np.flatnonzero(censored)
    if flagged.size == 0:
        return values, 0
    if policy == "reject":
        raise InvalidInput(
            [
                FieldIssue(pointer_for("censored", int(i)), "below the detection limit (censoring policy is 'reject')")
                for i in flagged[:20]
            ]
        )
    if limits is None:
        raise InvalidInput.at(pointer_for("detection_limits", None), "censored samples need their detection limits")
    if limits.size != values.size:
        raise InvalidInput.at(
            pointer_for("detection_limits", None), f"has {limits.size} entries but values has {values.size}"
        )
    bad = [i for i in flagged if not (np.isfinite(limits[i]) and limits[i] > 0)]
    if bad:
        raise InvalidInput(
            [
                FieldIssue(
                    pointer_for("detection_limits", int(i)), "a censored sample needs a positive detection limit"
                )
                for i in bad[:20]
            ]
        )
    out = np.array(values, dtype=np.float64)
    out[flagged] = _FACTOR[policy] * limits[flagged]
    return out, int(flagged.size)
