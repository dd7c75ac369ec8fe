"""README's two set-up commands stay true: the main job on the bundled sample, and the test
command that .ci/run runs verbatim."""
from __future__ import annotations

import re
import shutil
import subprocess
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]


def _sh_blocks():
    return re.findall(r"```sh\n(.*?)```", (ROOT / "README.md").read_text(), flags=re.S)


def test_main_command_runs_the_check_on_a_bundled_sample():
    main = _sh_blocks()[0].strip()
    m = re.fullmatch(r"pip install \. && resweep check (sample_traces/\S+\.h5)", main)
    assert m, main
    sample = ROOT / m.group(1)
    assert sample.is_file()
    exe = shutil.which("resweep") or str(Path(sys.executable).with_name("resweep"))
    r = subprocess.run([exe, "check", m.group(1)], cwd=ROOT, capture_output=True, text=True, timeout=300)
    assert r.returncode == 1, r.stderr  # the sample holds error-severity divergences on purpose
    assert "tunneling" in r.stdout and "result: FAIL" in r.stdout


def test_ci_runs_exactly_the_readme_test_command():
    test_cmd = _sh_blocks()[1].strip()
    assert "pytest" in test_cmd
    ci = (ROOT / ".ci" / "run").read_text().splitlines()
    assert test_cmd in [ln.strip() for ln in ci]
