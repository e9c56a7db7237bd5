"""``benchgate.plan`` stays light: the judge imports ``benchgate.plan.limits``."""

from __future__ import annotations

import subprocess
import sys


def test_limits_import_does_not_pull_yaml_or_numpy():
    code = ("import sys, benchgate.plan.limits, benchgate.plan; "
            "print(','.join(m for m in ('yaml', 'numpy', 'benchgate.plan.loader') if m in sys.modules))")
    r = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=60)
    assert r.returncode == 0, r.stderr
    assert r.stdout.strip() == ""


def test_lazy_names():
    import benchgate.plan as plan

    assert plan.Plan.__name__ == "Plan" and plan.Window.__name__ == "Window"
    assert plan.CaptureStep(id="a", title="t", channel="out", duration=1.0).kind == "capture"
