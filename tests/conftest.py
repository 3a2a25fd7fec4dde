"""Shared fixtures: where ../shared is, small scenes, output folders."""

from __future__ import annotations

import os
from pathlib import Path

import pytest

REPO = Path(__file__).resolve().parents[1]
SHARED = Path(os.environ.get("VARIANTSHOT_SHARED", REPO.parent / "shared"))


@pytest.fixture(scope="session")
def shared_dir() -> Path:
    """The read-only ``../shared`` folder of published test data; skip when it is absent."""
    if not SHARED.is_dir():
        pytest.skip(f"{SHARED} is absent (a user's clone has no ../shared; CI has it)")
    return SHARED


@pytest.fixture(scope="session")
def gltf_samples(shared_dir) -> Path:
    path = shared_dir / "gltf-samples"
    if not path.is_dir():
        pytest.skip(f"{path} is absent")
    return path


@pytest.fixture(scope="session")
def repo_dir() -> Path:
    return REPO


_VALIDATOR_JS = r"""
const validator = require(process.argv[2]);
const fs = require('fs'); const path = require('path');
(async () => {
  const out = [];
  for (const f of process.argv.slice(3)) {
    const dir = path.dirname(f);
    try {
      const r = await validator.validateBytes(new Uint8Array(fs.readFileSync(f)), {
        uri: path.basename(f), maxIssues: 100,
        externalResourceFunction: (uri) => new Promise((ok, fail) => fs.readFile(
          path.join(dir, decodeURIComponent(uri)), (e, d) => e ? fail(String(e)) : ok(new Uint8Array(d)))),
      });
      out.push({file: f, errors: r.issues.numErrors,
                codes: r.issues.messages.filter(m => m.severity === 0).map(m => m.code + ' ' + (m.pointer || ''))});
    } catch (e) { out.push({file: f, errors: -1, codes: [String(e)]}); }
  }
  console.log(JSON.stringify(out));
})();
"""


@pytest.fixture(scope="session")
def khronos_validate(tmp_path_factory):
    """The Khronos glTF validator (npm ``gltf-validator``) as ``validate(paths) -> list of dict``.

    Each result is ``{"file", "errors": number of errors (-1 if it could not run), "codes": [
    "CODE /json/pointer", ...]}``.  Skips unless ``VARIANTSHOT_GLTF_VALIDATOR`` names the installed
    package folder and ``node`` is on PATH (``.ci/run`` provides both).
    """
    import json
    import shutil
    import subprocess

    package = os.environ.get("VARIANTSHOT_GLTF_VALIDATOR")
    node = shutil.which("node")
    if not package or not Path(package).is_dir() or node is None:
        pytest.skip("the Khronos glTF validator is not installed (set VARIANTSHOT_GLTF_VALIDATOR; .ci/run does)")
    script = tmp_path_factory.mktemp("validator") / "validate.js"
    script.write_text(_VALIDATOR_JS)

    def validate(paths):
        paths = [str(p) for p in paths]
        done = subprocess.run([node, str(script), str(Path(package).resolve()), *paths],
                              capture_output=True, text=True, timeout=120, check=True)
        return json.loads(done.stdout)

    return validate
