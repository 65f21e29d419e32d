"""A TypeScript client (openapi-typescript types + openapi-fetch) from the committed contract,
compiled with ``tsc --strict`` and run by node against gunicorn.

Skipped with a message when npm or node is absent. The script (below) fails to compile if
a member it reads is optional or missing in the generated types, and exits non-zero if a
value it reads is not what the service should answer.
"""

from __future__ import annotations

import json
import shutil
import subprocess
from pathlib import Path

from lagwise.api.examples import REQUESTS

from tests.live import running_service
from tests.npm_tools import run_tool, tools_folder

COMMITTED = Path(__file__).resolve().parents[2] / "openapi" / "openapi.yaml"

SCRIPT = """\
import createClient from "openapi-fetch";
import type { paths, components } from "./schema.js";

type Model = components["schemas"]["Model"];
const [baseUrl, examples] = [process.argv[2], JSON.parse(process.argv[3])];
const client = createClient<paths>({ baseUrl });

function check(condition: boolean, what: string): void {
  if (!condition) throw new Error(`unexpected: ${what}`);
}

const exp = await client.POST("/v1/experimental-variograms", { body: examples.experimental_variograms });
check(exp.data !== undefined && "directions" in exp.data && exp.data.directions[0].classes.length === 4, "experimental classes");

const fit = await client.POST("/v1/model-fits", { body: examples.model_fits });
if (fit.data === undefined) throw new Error("no fit");
const selected = fit.data.candidates.filter((c) => c.selected);
check(selected.length === 1, "exactly one selected candidate");
const fitted = fit.data.model;
if ("variables" in fitted) throw new Error("one variable gave a joint model");
const model: Model = fitted;
const first = model.structures?.[0];
check(first !== undefined && first.family !== "linear" && first.family !== "power" && first.range > 0, "a fitted range");

const cv = await client.POST("/v1/cross-validations", {
  body: { samples: examples.cross_validations.samples, model },
});
if (cv.data === undefined) throw new Error("no cross-validation");
const rmse: number | null = cv.data.statistics.root_mean_square_error;
check(rmse !== null && rmse > 0 && cv.data.samples.estimate.length === 20, "cross-validation statistics");

const prediction = await client.POST("/v1/predictions", { body: { ...examples.predictions, model } });
if (prediction.data === undefined) throw new Error("no prediction");
// The answer may also be an Arrow stream (Accept), typed as a string: this one is JSON.
if (typeof prediction.data === "string") throw new Error("expected the JSON answer");
const estimates: (number | null)[] = prediction.data.estimate;
check(estimates.length === 9 && prediction.data.variance.length === 9, "prediction arrays");

const analysis = await client.POST("/v1/analyses", { body: examples.analyses });
if (analysis.data === undefined) throw new Error("no analysis");
check(
  "cross_validation" in analysis.data && analysis.data.cross_validation !== null && analysis.data.cross_validation.statistics.count === 20,
  "analysis",
);

const refused = await client.POST("/v1/experimental-variograms", {
  body: { ...examples.experimental_variograms, min_pairs: 0 },
});
check(refused.error !== undefined && refused.error.errors?.[0].pointer === "/min_pairs", "a typed problem");

const families = await client.GET("/v1/model-families");
const health = await client.GET("/healthz");
const kind = await client.GET("/problems/{kind}", { params: { path: { kind: "limit-exceeded" } } });
check(families.data !== undefined && health.data?.status === "alive" && kind.data?.status === 422, "reads");

console.log(JSON.stringify({ rmse, selected: selected[0].label, estimates: estimates.length }));
"""
TSCONFIG = {
    "compilerOptions": {
        "strict": True,
        "target": "es2022",
        "module": "nodenext",
        "moduleResolution": "nodenext",
        "outDir": "out",
        "skipLibCheck": True,
        "noUncheckedIndexedAccess": False,
    },
    "files": ["main.mts", "schema.d.ts"],
}


def test_strict_typescript_client_against_gunicorn(tmp_path):
    folder = tools_folder()
    (tmp_path / "node_modules").symlink_to(folder / "node_modules")
    shutil.copy(COMMITTED, tmp_path / "openapi.yaml")
    # Members with a default stay optional in requests (the tool's default would make them required).
    generated = run_tool(
        "openapi-typescript", "openapi.yaml", "-o", "schema.d.ts", "--default-non-nullable", "false", cwd=tmp_path
    )
    assert generated.returncode == 0, generated.stdout + generated.stderr
    (tmp_path / "main.mts").write_text(SCRIPT)
    (tmp_path / "package.json").write_text('{"type": "module", "private": true}')
    (tmp_path / "tsconfig.json").write_text(json.dumps(TSCONFIG))
    compiled = run_tool("tsc", "-p", "tsconfig.json", cwd=tmp_path)
    assert compiled.returncode == 0, compiled.stdout + compiled.stderr
    with running_service(workers=1) as url:
        ran = subprocess.run(
            ["node", str(tmp_path / "out" / "main.mjs"), url, json.dumps(REQUESTS)],
            capture_output=True,
            text=True,
            timeout=300,
        )
    assert ran.returncode == 0, ran.stdout + ran.stderr
    summary = json.loads(ran.stdout.strip().splitlines()[-1])
    assert summary["rmse"] > 0 and summary["estimates"] == 9
