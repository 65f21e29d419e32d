"""Samples sent without ids are named by their 0-based input index, as text, in every per-sample answer."""

from __future__ import annotations

import numpy as np


def test_samples_sent_without_ids_are_named_by_their_index_in_the_answer(client):
    # The identifiers are made only when read (IndexIds); they reach the response as text, not a 500.
    rng = np.random.default_rng(5)
    xy = rng.uniform(0, 100, (60, 2))
    document = {
        "samples": {"x": xy[:, 0].tolist(), "y": xy[:, 1].tolist(), "values": rng.normal(size=60).tolist()},
        "fit": {"compare": False, "anisotropy": "none"},
        "cross_validation": {"kriging": {"type": "ordinary"}},
    }
    r = client.post("/v1/analyses", json=document)
    assert r.status_code == 200, r.json
    assert r.json["cross_validation"]["samples"]["id"] == [str(i) for i in range(60)]
