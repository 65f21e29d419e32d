"""Samples sent without ids are named by their 0-based input index, as text, in every per-sample answer."""

from __future__ import annotations

import numpy as np


def test_samples_sent_without_ids_are_named_by_their_index_in_the_answer(client):
    # The identifiers are made only when read (IntegerIds); they reach the response as text, not a 500.
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


def test_features_without_an_id_never_take_another_features_id(client):
    # Feature 3 has no id and its index "3" is feature 0's id: it becomes "#3", and "##3" where
    # "#3" is given too; the others without an id keep their index.
    rng = np.random.default_rng(6)
    xy = rng.uniform(0, 100, (60, 2))
    given = {0: "3", 1: "#3", 2: 7}
    features = [
        {
            "type": "Feature",
            **({"id": given[i]} if i in given else {}),
            "geometry": {"type": "Point", "coordinates": [float(xy[i, 0]), float(xy[i, 1])]},
            "properties": {"v": float(v)},
        }
        for i, v in enumerate(rng.normal(size=60))
    ]
    document = {
        "samples": {"geojson": {"type": "FeatureCollection", "features": features}, "value_property": "v"},
        "coordinates": "planar",
        "fit": {"compare": False, "anisotropy": "none"},
        "cross_validation": {"kriging": {"type": "ordinary"}},
    }
    r = client.post("/v1/analyses", json=document)
    assert r.status_code == 200, r.json
    ids = r.json["cross_validation"]["samples"]["id"]
    assert ids[:8] == ["3", "#3", "7", "##3", "4", "5", "6", "#7"]
    assert ids[8:] == [str(i) for i in range(8, 60)]
    assert len(set(ids)) == 60
