"""Adding one measurement end to end through the registry, counted in files.

A throw-away measurement -- the crest factor (sample peak over RMS, dB) -- is
added to a copy of the package: an analyzer, a spec section declaring its check,
one registry line each.  Then ``masterqc check`` judges it, writes it in the
result (which fits the generated schema) and the report shows its row.  The
number of files that had to change is the point of the test (house choice:
at most 4, two of them new).

Value checked: a sine's crest factor is 20*log10(sqrt(2)) = 3.0103 dB (analytic:
peak A, RMS A/sqrt(2)).
"""

from __future__ import annotations

import filecmp
import json
import os
import shutil
import subprocess
import sys
import textwrap
from pathlib import Path

import numpy as np
import soundfile as sf

import masterqc

ANALYZER = '''\
"""Throw-away analyzer of the registry test: crest factor (sample peak over RMS)."""

from __future__ import annotations

import math

from masterqc.contract import measured
from masterqc.measure.base import NUMBER_OR_NULL, Analyzer, AnalyzerResult


class CrestAnalyzer(Analyzer):
    name = "crest"
    measurement_schema = {
        "crest_factor_db": measured(NUMBER_OR_NULL, "db", "sample peak over RMS of the loudest channel"),
    }

    def __init__(self, info, options):
        super().__init__(info, options)
        self.peak, self.energy, self.n = 0.0, 0.0, 0

    def process(self, block):
        self.peak = max(self.peak, float(abs(block).max()))
        self.energy += float((block[:, 0] ** 2).sum())
        self.n += block.shape[0]

    def finish(self):
        rms = math.sqrt(self.energy / self.n) if self.n else 0.0
        value = 20.0 * math.log10(self.peak / rms) if rms > 0 else None
        return AnalyzerResult(measurements={"crest_factor_db": value})
'''

SECTION = '''\
"""``crest:`` -- throw-away section of the registry test."""

from __future__ import annotations

from pydantic import Field

from masterqc.contract import Check
from masterqc.spec.types import SpecModel, floor

CHECKS = (Check("crest_factor", "crest.crest_factor", "crest_factor_db", "db", "crest factor",
                "the file is digital silence"),)


class Section(SpecModel):
    """Crest-factor requirements."""

    crest_factor: floor("db") | None = Field(None, description="lowest crest factor, dB")
'''

DRIVER = '''\
import json, sys
import jsonschema
from masterqc.cli import main
from masterqc.schema import result_schema
code = main(["check", sys.argv[1], "--spec", sys.argv[2], "--out", sys.argv[3], "--format", "json,html", "--quiet"])
result = json.load(open(sys.argv[3] + "/sine.json"))
jsonschema.validate(result, result_schema())
print(json.dumps({"code": code, "result": result}))
'''


def _add_line_after(path: Path, anchor: str, text: str) -> None:
    src = path.read_text(encoding="utf-8")
    assert anchor in src, (path, anchor)
    path.write_text(src.replace(anchor, anchor + text, 1), encoding="utf-8")


def test_a_throwaway_measurement_end_to_end_touches_four_files(tmp_path):
    original = Path(masterqc.__file__).parent
    copy = tmp_path / "pkg" / "masterqc"
    shutil.copytree(original, copy, ignore=shutil.ignore_patterns("__pycache__"))

    (copy / "measure" / "crest.py").write_text(ANALYZER, encoding="utf-8")
    (copy / "spec" / "sections" / "crest.py").write_text(SECTION, encoding="utf-8")
    _add_line_after(copy / "measure" / "registry.py", "    classes += [imaging.ImagingAnalyzer, aliasing.AliasingAnalyzer]\n",
                    "    from masterqc.measure import crest\n    classes += [crest.CrestAnalyzer]\n")
    _add_line_after(copy / "registry.py", "from masterqc.judge.core import judge_checks\n",
                    "from masterqc.spec.sections import crest\n")
    _add_line_after(copy / "registry.py", '    SectionEntry("sampling", sampling, judge_sampling.judge),\n',
                    '    SectionEntry("crest", crest, declared_judge(crest)),\n')

    changed = []
    for folder, _dirs, files in os.walk(copy):
        for name in files:
            p = Path(folder) / name
            twin = original / p.relative_to(copy)
            if not twin.exists() or not filecmp.cmp(p, twin, shallow=False):
                changed.append(str(p.relative_to(copy)))
    assert sorted(changed) == ["measure/crest.py", "measure/registry.py", "registry.py", "spec/sections/crest.py"]

    rate = 48000
    t = np.arange(2 * rate) / rate
    x = 0.5 * np.sin(2 * np.pi * 997.0 * t)
    sf.write(tmp_path / "sine.wav", np.stack([x, x], axis=1), rate, subtype="PCM_24")
    spec = tmp_path / "crest.yaml"
    spec.write_text(textwrap.dedent("""\
        spec_version: 1
        name: crest test (invented)
        crest:
          crest_factor: {min_db: 6.0}
        """), encoding="utf-8")
    out = tmp_path / "out"
    env = dict(os.environ, PYTHONPATH=str(copy.parent))
    proc = subprocess.run([sys.executable, "-c", DRIVER, str(tmp_path / "sine.wav"), str(spec), str(out)],
                          capture_output=True, text=True, env=env, cwd=tmp_path, timeout=300)
    assert proc.returncode == 0, proc.stderr
    data = json.loads(proc.stdout.strip().splitlines()[-1])
    assert data["code"] == 1  # the sine's 3.0 dB misses the 6.0 dB floor: exit 1
    m = data["result"]["measurements"]
    # analytic: a sine's peak over its RMS is sqrt(2), 20*log10(sqrt(2)) = 3.01 dB, shown and judged
    # at 0.1 dB as 3.0; the 6.0 dB floor of the spec above is missed by 3.0
    assert abs(m["crest_factor_db"] - 20 * np.log10(np.sqrt(2))) < 0.01
    (finding,) = [f for f in data["result"]["findings"] if f["check"] == "crest.crest_factor"]
    assert finding["status"] == "fail" and finding["measured"] == 3.0 and finding["limit_low"] == 6.0
    assert finding["unit"] == "dB" and finding["miss"] == 3.0
    html = (out / "sine.html").read_text(encoding="utf-8")
    plain = html.replace("\u00a0", " ")
    # the certificate's line and the appendix's finding row, from the judge's numbers
    assert plain.count("Crest factor is 3.0 dB, 3.0 dB below the limit of 6.0 dB.") >= 2
