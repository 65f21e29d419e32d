"""samples.variables on the HTTP endpoints: parsing, selection of one variable, refusals naming field and index."""

from __future__ import annotations

import numpy as np
import pytest

PROBLEM = "application/problem+json"
RNG = np.random.default_rng(12)
N = 40
X = RNG.uniform(0, 100, N).round(3).tolist()
Y = RNG.uniform(0, 100, N).round(3).tolist()
LEAD = RNG.lognormal(3, 0.5, N).round(3).tolist()
ZINC = [None if i % 3 == 0 else v for i, v in enumerate(RNG.lognormal(4, 0.3, N).round(3).tolist())]


def multi(**samples):
    return {"x": X, "y": Y, "variables": {"lead": LEAD, "zinc": ZINC}, **samples}


def problem(r, pointers):
    assert r.status_code == 422, r.data[:500]
    assert r.mimetype == PROBLEM
    assert [e["pointer"] for e in r.json["errors"]] == pointers, r.json
    return r.json


def measured(column):
    keep = [i for i, v in enumerate(column) if v is not None]
    return [X[i] for i in keep], [Y[i] for i in keep], [column[i] for i in keep]


@pytest.mark.parametrize("name, column", [("lead", LEAD), ("zinc", ZINC)])
def test_a_selected_variable_equals_the_single_variable_request(client, name, column):
    x, y, values = measured(column)
    lags = {"width": 10, "count": 6}
    one = client.post("/v1/experimental-variograms", json={"samples": multi(), "variable": name, "lags": lags})
    alone = client.post(
        "/v1/experimental-variograms", json={"samples": {"x": x, "y": y, "values": values}, "lags": lags}
    )
    assert one.status_code == alone.status_code == 200, one.json
    assert one.json["directions"] == alone.json["directions"]
    assert one.json["summary"]["samples"] == len(values)


def test_model_fit_and_cross_validation_take_a_variable(client):
    fit = client.post("/v1/model-fits", json={"samples": multi(), "variable": "zinc", "families": ["spherical"]})
    assert fit.status_code == 200, fit.json
    model = fit.json["model"]
    cv = client.post("/v1/cross-validations", json={"samples": multi(), "variable": "lead", "model": model})
    assert cv.status_code == 200, cv.json
    assert cv.json["statistics"]["count"] == N


def test_several_variables_without_a_choice_are_refused_clearly(client):
    # Model fits of several variables without a choice fit them jointly (tests/api/test_cokriging_api.py).
    model = {"nugget": 0.1, "structures": [{"family": "spherical", "partial_sill": 1.0, "range": 30.0}]}
    doc = problem(client.post("/v1/cross-validations", json={"samples": multi(), "model": model}), ["/variable"])
    assert "lead, zinc" in doc["detail"]
    problem(client.post("/v1/model-fits", json={"samples": multi(), "variable": "tin"}), ["/variable"])


def test_one_variable_needs_no_choice(client):
    r = client.post("/v1/variogram-maps", json={"samples": {"x": X, "y": Y, "variables": {"zinc": ZINC}}})
    assert r.status_code == 200, r.json


@pytest.mark.parametrize(
    "samples, pointers",
    [
        (multi(values=LEAD), ["/samples/values"]),
        ({"x": X, "y": Y, "variables": {"lead": LEAD, "zinc": ZINC[:-1]}}, ["/samples/variables/zinc"]),
        ({"x": X, "y": Y, "variables": {"lead": LEAD, "zinc": [None] * N}}, ["/samples/variables/zinc"]),
        ({"x": X, "y": Y, "variables": {"lead": LEAD, "zinc": [1.0] + [None] * (N - 1)}}, ["/samples/variables/zinc"]),
        ({"x": X, "y": Y, "variables": {"lead": LEAD[:5] + ["a"] + LEAD[6:]}}, ["/samples/variables/lead/5"]),
        ({"x": X, "y": Y, "variables": {"lead": LEAD, "zinc": ZINC}, "censored": {"tin": [False] * N}}, None),
        ({"x": X, "y": Y, "variables": {}}, ["/samples/variables"]),
    ],
)
def test_bad_variables_name_field_and_index(client, samples, pointers):
    r = client.post("/v1/model-fits", json={"samples": samples, "variable": "lead"})
    problem(r, pointers or ["/samples/censored/tin"])


def test_non_finite_value_names_variable_and_index(client):
    body = (
        b'{"variable": "lead", "samples": {"x": [0, 1, 2, 3], "y": [0, 1, 0, 1], '
        b'"variables": {"lead": [1, 2, 3, 1e400], "zinc": [1, null, 2, 3]}}}'
    )
    r = client.post("/v1/model-fits", data=body, content_type="application/json")
    problem(r, ["/samples/variables/lead/3"])


def test_censored_entries_per_variable(client):
    zinc = [None, 2.0, 3.0, 4.0, 5.0, 1.0]
    samples = {
        "x": [0, 1, 2, 3, 4, 5],
        "y": [0, 1, 0, 1, 0, 1],
        "variables": {"zinc": zinc},
        "censored": {"zinc": [True, False, False, False, False, False]},
        "detection_limits": {"zinc": [0.5, None, None, None, None, None]},
        "units": {"zinc": "mg/kg"},
    }
    r = client.post("/v1/experimental-variograms", json={"samples": samples, "lags": {"width": 2, "count": 3}})
    assert r.status_code == 200, r.json
    assert r.json["variables"][0]["summary"]["samples"] == 6 and r.json["variables"][0]["unit"] == "mg/kg"
    assert any("detection limit" in w for w in r.json["warnings"])


def feature(x, y, **properties):
    return {"type": "Feature", "geometry": {"type": "Point", "coordinates": [x, y]}, "properties": properties}


def test_geojson_variable_properties(client):
    features = [feature(X[i], Y[i], lead=LEAD[i], **({} if ZINC[i] is None else {"zinc": ZINC[i]})) for i in range(N)]
    features[1]["properties"]["zinc"] = "<0.5"
    samples = {"geojson": {"type": "FeatureCollection", "features": features}, "variable_properties": ["lead", "zinc"]}
    r = client.post(
        "/v1/experimental-variograms",
        json={"samples": samples, "coordinates": "planar", "variable": "zinc", "lags": {"width": 10, "count": 4}},
    )
    assert r.status_code == 200, r.json
    assert r.json["summary"]["samples"] == sum(v is not None for v in ZINC) + (ZINC[1] is None)


def test_geojson_bad_property_names_the_feature(client):
    features = [feature(X[i], Y[i], lead=LEAD[i], zinc=1.0 + i) for i in range(N)]
    features[7]["properties"]["zinc"] = "high"
    samples = {"geojson": {"type": "FeatureCollection", "features": features}, "variable_properties": ["lead", "zinc"]}
    r = client.post("/v1/model-fits", json={"samples": samples, "coordinates": "planar", "variable": "zinc"})
    problem(r, ["/samples/geojson/features/7/properties/zinc"])
    both = {**samples, "value_property": "lead"}
    problem(client.post("/v1/model-fits", json={"samples": both, "variable": "zinc"}), ["/samples/value_property"])


def test_several_variables_give_direct_and_cross_variograms(client):
    lags = {"width": 10, "count": 6}
    directions = [{"azimuth": 0, "tolerance": 90}, {"azimuth": 45, "tolerance": 22.5}]
    r = client.post(
        "/v1/experimental-variograms",
        json={"samples": multi(units={"lead": "mg/kg"}), "lags": lags, "directions": directions},
    )
    assert r.status_code == 200, r.json
    doc = r.json
    assert [v["name"] for v in doc["variables"]] == ["lead", "zinc"]
    assert doc["variables"][0]["unit"] == "mg/kg" and doc["variables"][1]["unit"] is None
    assert [c["variables"] for c in doc["cross"]] == [["lead", "zinc"]]
    assert len(doc["cross"][0]["directions"]) == 2
    assert doc["parameters"]["variables"] == ["lead", "zinc"] and "both ends" in doc["parameters"]["cross_statistic"]
    x, y, values = measured(ZINC)
    alone = client.post(
        "/v1/experimental-variograms",
        json={"samples": {"x": x, "y": y, "values": values}, "lags": lags, "directions": directions},
    ).json
    for ours, theirs in zip(doc["variables"][1]["directions"], alone["directions"], strict=True):
        for row, single in zip(ours["classes"], theirs["classes"], strict=True):
            assert row["pairs"] == single["pairs"]
            assert row["value"] == pytest.approx(single["value"], rel=1e-9)
    assert doc["variables"][1]["summary"]["samples"] == len(values)


def test_statistic_without_a_cross_form_says_so(client):
    r = client.post("/v1/experimental-variograms", json={"samples": multi(), "statistic": "madogram"})
    assert r.status_code == 200, r.json
    assert r.json["cross"] == [] and any("no cross form" in w for w in r.json["warnings"])


def test_scattergram_needs_one_variable(client):
    r = client.post("/v1/experimental-variograms", json={"samples": multi(), "pairs_for_class": {"class": 0}})
    problem(r, ["/pairs_for_class"])


def test_the_pair_limit_weighs_the_variables(small_limits_client):
    """Covariances of p variables add p x p sums per pair: a request one variable may make is refused for three."""
    x = [float(i) for i in range(30)]
    body = {"lags": {"width": 1, "count": 5}, "statistic": "covariance"}
    one = small_limits_client.post(
        "/v1/experimental-variograms", json={"samples": {"x": x, "variables": {"a": x}}, **body}
    )
    assert one.status_code == 200, one.json
    three = {"x": x, "variables": {"a": x, "b": [v * v for v in x], "c": [-v for v in x]}}
    refused = small_limits_client.post("/v1/experimental-variograms", json={"samples": three, **body})
    assert refused.status_code == 422 and refused.json["type"] == "/problems/limit-exceeded", refused.json
    assert refused.json["limit"] == "LAGWISE_MAX_PAIRS"


def blocks_data(n=120, seed=21):
    """Invented: lead and copper at every sample, zinc missing at every fourth."""
    rng = np.random.default_rng(seed)
    x, y = rng.uniform(0, 100, n).round(3), rng.uniform(0, 100, n).round(3)
    trend = np.sin(x / 15.0) + np.cos(y / 20.0)
    lead = (30 + 5 * trend + rng.normal(0, 1, n)).round(3).tolist()
    copper = (12 - 2 * trend + rng.normal(0, 1, n)).round(3).tolist()
    zinc = [None if i % 4 == 0 else v for i, v in enumerate((60 + 8 * trend + rng.normal(0, 2, n)).round(3).tolist())]
    return x.tolist(), y.tolist(), {"lead": lead, "copper": copper, "zinc": zinc}


def alone_request(client, x, y, column, options):
    keep = [i for i, v in enumerate(column) if v is not None]
    samples = {"x": [x[i] for i in keep], "y": [y[i] for i in keep], "values": [column[i] for i in keep]}
    r = client.post("/v1/experimental-variograms", json={"samples": samples, **options})
    assert r.status_code == 200, r.json
    return r.json


def test_direct_variograms_carry_the_single_variable_class_uncertainties(client):
    """Reference: each variable's single-variable request on the samples where it was measured
    (its delete-one-block jackknife, checked against a brute-force recomputation in
    tests/core/test_class_uncertainty.py and tests/core/test_several_uncertainty.py)."""
    x, y, columns = blocks_data()
    options = {"lags": {"width": 10, "count": 6}, "directions": [{"azimuth": 0, "tolerance": 90}, {"azimuth": 45}]}
    r = client.post("/v1/experimental-variograms", json={"samples": {"x": x, "y": y, "variables": columns}, **options})
    assert r.status_code == 200, r.json
    doc = r.json
    for variable in doc["variables"]:
        alone = alone_request(client, x, y, columns[variable["name"]], options)
        assert variable["directions"] == alone["directions"]  # standard errors and intervals included, to the bit
        assert variable["class_uncertainty"] == alone["parameters"]["class_uncertainty"]
        assert variable["class_uncertainty"]["blocks"] == 8
    assert "jackknife" in doc["parameters"]["class_uncertainty"]["method"]
    assert doc["parameters"]["class_uncertainty"]["blocks"] == 8
    for cross in doc["cross"]:
        assert cross["class_uncertainty"]["blocks"] == 8
        rows = [row for d in cross["directions"] for row in d["classes"] if row["value"] is not None]
        assert rows and all(row["standard_error"] > 0 for row in rows)
        for row in rows:
            lower, upper = row["interval_95"]
            assert (lower + upper) / 2 == pytest.approx(row["value"], rel=1e-9, abs=1e-12)  # symmetric


def test_automatic_classes_with_every_variable_everywhere_equal_the_single_variable_requests(client):
    x, y, columns = blocks_data()
    both = {"lead": columns["lead"], "copper": columns["copper"]}
    r = client.post("/v1/experimental-variograms", json={"samples": {"x": x, "y": y, "variables": both}})
    assert r.status_code == 200, r.json
    for variable in r.json["variables"]:
        alone = alone_request(client, x, y, columns[variable["name"]], {})
        assert variable["directions"] == alone["directions"]


def test_cross_covariances_say_why_they_have_no_standard_errors(client):
    x, y, columns = blocks_data()
    r = client.post(
        "/v1/experimental-variograms",
        json={"samples": {"x": x, "y": y, "variables": columns}, "statistic": "covariance"},
    )
    assert r.status_code == 200, r.json
    for cross in r.json["cross"]:
        assert cross["class_uncertainty"] == {"method": None, "blocks": None}
        rows = [row for d in cross["directions"] for row in d["classes"] if row["value"] is not None]
        assert rows and all("cross-covariance" in row["uncertainty_reason"] for row in rows)
        assert all(row["standard_error"] is None for row in rows)
    assert all(v["class_uncertainty"]["blocks"] == 8 for v in r.json["variables"])
