"""How the desk's runner is put together for the page: the same Runner as ``benchgate run``,
its bench opener wrapped so that each run ends with the supply's own word on its output, and
its capture writer so that the page draws every capture as soon as it is saved.
"""

from __future__ import annotations

from collections.abc import Callable
from typing import Any

from benchgate.web.face import PageFace


class ConfirmingBench:
    """The bench of one run, wrapped so that closing it asks the supply whether it is off.

    The runner's safe-state sequence switches the output off and then closes the bench; just
    before the bench closes, this asks the supply for its output state (switching off once more
    if it still says on) and reports what it said to ``confirmed(state, text)``.
    """

    def __init__(self, inner_cm: Any, confirmed: Callable[[str, str], None]):
        self.inner_cm = inner_cm
        self.bench: Any = None
        self.confirmed = confirmed

    def __enter__(self) -> Any:
        self.bench = self.inner_cm.__enter__()
        return self.bench

    def __exit__(self, *exc: Any) -> Any:
        confirm_supply_off(self.bench, self.confirmed)  # never raises
        return self.inner_cm.__exit__(*exc)


def confirm_supply_off(bench: Any, confirmed: Callable[[str, str], None]) -> None:
    """Switch the supply output off if it is on, ask it again, and report what it said."""
    supply = None if bench is None else bench.get("supply")
    if supply is None:
        confirmed("none", "this station has no supply")
        return
    try:
        if supply.output_state():
            supply.output(False)
            if supply.output_state():
                confirmed("on", "the supply still reports its output ON: switch it off by hand")
                return
        confirmed("off", "supply output off (asked from the supply)")
    except Exception as exc:  # noqa: BLE001 - an unanswered question is shown as such
        confirmed("unknown", f"the supply did not answer ({exc}): check its output by hand")


def make_runner(plan: Any, station: Any, options: Any, face: PageFace,
                on_capture: Callable[[Any, Any], None], confirmed: Callable[[str, str], None]) -> Any:
    """A :class:`~benchgate.runner.session.Runner` talking to ``face`` (``options``: the same
    RunOptions as ``benchgate run``).

    Its bench opener is wrapped so that each run ends with the supply's own word on its output,
    and its capture writer so that the page sees every capture as soon as it is saved.
    Preflight (station lock where there is one, calibration, cautions, hazards) runs here.
    """
    from benchgate.instruments import open_station
    from benchgate.runner.session import Runner, Services

    services = Services.default(options, station)
    opener = options.open_bench or open_station
    save = services.save_capture

    def open_bench(*args: Any, **kw: Any) -> ConfirmingBench:
        return ConfirmingBench(opener(*args, **kw), confirmed)

    def save_capture(capture: Any, path: Any) -> str:
        sha = save(capture, path)
        try:
            on_capture(capture, path)
        except Exception:  # noqa: BLE001 - the picture is a courtesy; the evidence is saved
            pass
        return sha

    services.open_bench = open_bench
    services.save_capture = save_capture
    return Runner(plan, station, options, services=services, attendant=face)
