"""TEMPORARY stand-in for ``benchgate.capfile.load_capture`` while it is being written.

Used by ``benchgate report`` only when ``benchgate.capfile`` cannot be found; to be deleted as
soon as it lands.
"""

from __future__ import annotations

import numpy as np

from benchgate.analysis.capture import Capture


def load_capture(path):
    """Read the agreed ``.npz`` capture format (samples, sample_rate, JSON meta)."""
    import json

    from benchgate.analysis.capture import AdcInfo
    from benchgate.errors import CaptureError

    try:
        with np.load(path, allow_pickle=False) as z:
            samples = np.array(z["samples"], dtype=float)
            rate = float(np.asarray(z["sample_rate"]).reshape(()))
            meta = json.loads(str(z["meta"])) if "meta" in z.files else {}
    except (OSError, KeyError, ValueError) as exc:
        raise CaptureError(f"cannot read capture: {exc}", str(path)) from None
    adc = AdcInfo.from_dict(meta["adc"]) if meta.get("adc") else None
    return Capture(samples, rate, start_time=float(meta.get("start_time", 0.0)),
                   channel=str(meta.get("channel", "ch0")), adc=adc, clock_ppm=meta.get("clock_ppm"),
                   metadata=meta.get("metadata") or {})
