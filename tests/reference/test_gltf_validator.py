"""Every scene the catalog stage writes passes the Khronos glTF validator with zero errors.

Validator: the Khronos Group's glTF-Validator, npm package ``gltf-validator`` 2.0.0-dev.3.10
(KhronosGroup/glTF-Validator), run with node through its ``validateBytes`` API; ``.ci/run``
installs it and sets ``VARIANTSHOT_GLTF_VALIDATOR`` to the package folder.  For a local run:
``mkdir -p /tmp/gv && cd /tmp/gv && npm install gltf-validator@2.0.0-dev.3.10`` and
``export VARIANTSHOT_GLTF_VALIDATOR=/tmp/gv/node_modules/gltf-validator``.
"""

from __future__ import annotations

import json
import os
import shutil
import subprocess
from pathlib import Path

import pytest

from variantshot.catalog.expand import expand_catalog

NODE_SCRIPT = r"""
const fs = require('fs');
const path = require('path');
const validator = require(process.env.VARIANTSHOT_GLTF_VALIDATOR);
(async () => {
  const out = {};
  for (const file of process.argv.slice(2)) {
    const dir = path.dirname(file);
    const report = await validator.validateBytes(new Uint8Array(fs.readFileSync(file)), {
      uri: path.basename(file),
      externalResourceFunction: (uri) => new Promise((resolve, reject) => {
        fs.readFile(path.join(dir, decodeURIComponent(uri)),
                    (err, data) => err ? reject(err.toString()) : resolve(new Uint8Array(data)));
      }),
    });
    out[file] = {
      errors: report.issues.numErrors,
      warnings: report.issues.numWarnings,
      messages: report.issues.messages.filter((m) => m.severity === 0)
                                      .map((m) => `${m.code} ${m.pointer || ''} ${m.message}`),
    };
  }
  process.stdout.write(JSON.stringify(out));
})().catch((e) => { process.stderr.write(String(e)); process.exit(3); });
"""


@pytest.fixture(scope="module")
def run_validator(tmp_path_factory):
    node = shutil.which("node")
    package = os.environ.get("VARIANTSHOT_GLTF_VALIDATOR")
    if node is None:
        pytest.skip("node is not installed (the Khronos glTF validator runs on node; .ci/run installs it)")
    if not package or not (Path(package) / "package.json").is_file():
        pytest.skip("VARIANTSHOT_GLTF_VALIDATOR does not point at an installed npm gltf-validator "
                    "(npm install gltf-validator@2.0.0-dev.3.10; .ci/run does this)")
    script = tmp_path_factory.mktemp("validator") / "validate.js"
    script.write_text(NODE_SCRIPT)

    def run(files):
        proc = subprocess.run([node, str(script), *map(str, files)], capture_output=True, text=True, timeout=300)
        assert proc.returncode == 0, proc.stderr
        return json.loads(proc.stdout)

    return run


def test_every_expanded_demo_scene_is_valid(run_validator, repo_dir, tmp_path):
    _, written = expand_catalog(repo_dir / "catalog" / "demo.csv", tmp_path / "out")
    assert len(written) >= 20
    reports = run_validator(written)
    for file, rep in reports.items():
        assert rep["errors"] == 0, (file, rep["messages"])


def test_demo_models_are_valid(run_validator, repo_dir):
    models = sorted((repo_dir / "catalog" / "models").glob("*.gltf"))
    assert len(models) >= 3
    for file, rep in run_validator(models).items():
        assert rep["errors"] == 0 and rep["warnings"] == 0, (file, rep["messages"])


def test_every_finish_gives_a_valid_scene(run_validator, repo_dir, tmp_path):
    from variantshot.catalog.finishes import load_finishes

    finishes = sorted(load_finishes(repo_dir / "templates" / "finishes"))
    rows = "\n".join(f'F-{name},mug,"lab(55, 20, -10)",{name},front' for name in finishes)
    path = tmp_path / "finishes.csv"
    path.write_text(f"sku,product,colour,finish,angles\n{rows}\n")
    _, written = expand_catalog(path, tmp_path / "out", templates_dir=repo_dir / "templates")
    assert len(written) == len(finishes)
    for file, rep in run_validator(written).items():
        assert rep["errors"] == 0, (file, rep["messages"])


def test_material_variant_entries_are_valid(run_validator, repo_dir, tmp_path):
    path = tmp_path / "mv.csv"
    path.write_text("sku,product,colour,finish,material_variant\nS-1,speaker,#445566,matte,*\n")
    _, written = expand_catalog(path, tmp_path / "out", templates_dir=repo_dir / "templates")
    assert len(written) == 2
    for file, rep in run_validator(written).items():
        assert rep["errors"] == 0, (file, rep["messages"])
