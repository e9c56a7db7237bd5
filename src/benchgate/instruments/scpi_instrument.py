"""The shared part of the SCPI drivers: :class:`ScpiInstrument` and reading uncertainty.

Each driver (``scpi_supply``, ``scpi_dmm``, ``scpi_counter``, ``scpi_digitizer``) subclasses
:class:`ScpiInstrument`, names its default command templates and calls :meth:`reading` /
:meth:`configure`. The session itself (pyvisa, error queue, blocks) is ``instruments.scpi``.
"""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any

import numpy as np

from benchgate.analysis.measurement import Measurement
from benchgate.errors import ScpiQueueError
from benchgate.instruments.options import OptionSpec, check_all, with_defaults
from benchgate.instruments.scpi import ScpiSession, station_error
from benchgate.instruments.scpi_commands import template_problems


def accuracy_table(spec: Any) -> tuple[dict[str, tuple[float, float]], list[tuple[tuple[str, ...], str]]]:
    """The ``accuracy`` option as {reading name or "*": (gain, offset)}, and its problems.

    ``{gain: 0.0005, offset: 0.002}`` applies to every reading; ``{dc_voltage: {...}, ...}``
    gives one bound per reading. ``gain`` is a fraction of the reading, ``offset`` in the
    reading's unit.
    """
    if spec is None:
        return {}, []
    if not isinstance(spec, Mapping):
        return {}, [(("accuracy",), "'accuracy' must be {gain: .., offset: ..} or one per reading")]
    entries = {"*": spec} if set(spec) <= {"gain", "offset"} else dict(spec)
    table: dict[str, tuple[float, float]] = {}
    problems: list[tuple[tuple[str, ...], str]] = []
    for name, entry in entries.items():
        at = ("accuracy",) if name == "*" else ("accuracy", str(name))
        if not isinstance(entry, Mapping) or not set(entry) <= {"gain", "offset"}:
            problems.append((at, f"accuracy entry {name!r} must have only 'gain' and 'offset'"))
            continue
        try:
            gain, offset = float(entry.get("gain", 0.0)), float(entry.get("offset", 0.0))
        except (TypeError, ValueError):
            problems.append((at, f"accuracy entry {name!r}: gain and offset must be numbers"))
            continue
        if not (gain >= 0 and offset >= 0 and np.isfinite(gain) and np.isfinite(offset)):
            problems.append((at, f"accuracy entry {name!r}: gain and offset must be >= 0"))
            continue
        table[str(name)] = (gain, offset)
    return table, problems


def _accuracy_table(config) -> dict[str, tuple[float, float]]:
    table, problems = accuracy_table(config.option("accuracy"))
    if problems:
        raise station_error(config, problems[0][1])
    return table


#: options every SCPI driver takes
COMMON_OPTIONS: Mapping[str, OptionSpec] = {
    "reset": OptionSpec("bool", "send *RST and *CLS after connecting"),
    "visa_library": OptionSpec("text", "pyvisa backend (default '@py', pyvisa-py)"),
    "resync_timeout": OptionSpec("quantity", "how long to drain stale replies after a timeout",
                                 unit="s", positive=True, maximum=3600.0),
    "commands": OptionSpec("mapping", "command templates replacing the driver's defaults"),
    "accuracy": OptionSpec("mapping", "accuracy bound {gain, offset}, or one per reading"),
}


class ScpiInstrument:
    """Shared part of the SCPI drivers: session, identity, readings, context manager."""

    DEFAULT_COMMANDS: Mapping[str, str] = {}
    OPTIONS: Mapping[str, OptionSpec] = {}  # a driver's own options, besides COMMON_OPTIONS

    @classmethod
    def station_options(cls) -> Mapping[str, OptionSpec]:
        return {**COMMON_OPTIONS, **cls.OPTIONS}

    @classmethod
    def complete_options(cls, options: Mapping[str, Any]) -> dict[str, Any]:
        return with_defaults(cls.station_options(), options)  # SCPI drivers default in code

    @classmethod
    def check_options(cls, options: Mapping[str, Any]) -> list[tuple[tuple[str, ...], str]]:
        """Unknown keys, wrong types, bad templates and accuracy entries (see base.DriverClass)."""
        problems = check_all(cls.station_options(), options)
        if "commands" in options:
            problems += template_problems(options["commands"], cls.DEFAULT_COMMANDS)
        if "accuracy" in options:
            problems += accuracy_table(options["accuracy"])[1]
        return problems

    def __init__(self, config, session: ScpiSession, *, clock=None):
        self.config = config
        self.name = config.role
        self.address = config.address
        self.calibration = config.calibration
        self.clock = clock
        self.session = session
        self._accuracy = _accuracy_table(config)

    @classmethod
    def open(cls, config, *, clock=None):
        _accuracy_table(config)  # station errors before touching the network
        session = ScpiSession.open(config, cls.DEFAULT_COMMANDS)
        try:
            return cls(config, session, clock=clock)
        except BaseException:
            session.close()
            raise

    @property
    def identity(self) -> str | None:
        return self.session.identity

    def reading(self, name: str, template: str, unit: str, **params: Any) -> Measurement:
        """Query template ``template`` and return Measurement ``name`` with its uncertainty.

        Expanded uncertainty from the accuracy bound a = gain·|x| + offset taken as a
        rectangular distribution: u = a/√3, U = 2u (JCGM 100:2008). SCPI's overload value
        (9.9E37) gives an invalid measurement.
        """
        command = self.session.command(template, **params)
        value = self.session.query_float(command)
        try:
            self.session.check_errors(command)
        except ScpiQueueError as exc:  # the instrument flagged this very reading: not trusted
            return Measurement.invalid(name, unit, f"{self.name}: {exc.message}", value=value,
                                       instrument=self.name, command=command, instrument_error=exc.code)
        if not np.isfinite(value) or abs(value) >= 9.9e37:
            return Measurement.invalid(name, unit, f"{self.name} reported overload or no value ({value:g})",
                                       instrument=self.name)
        bound = self._accuracy.get(name, self._accuracy.get("*"))
        uncertainty = None
        if bound is not None:
            a = bound[0] * abs(value) + bound[1]
            uncertainty = 2.0 * a / np.sqrt(3.0)
        return Measurement(name, value, unit, uncertainty,
                           details={"instrument": self.name, "command": command})

    def configure(self, template: str, **params: Any) -> None:
        """Send a configuration template and check the error queue."""
        self.session.write(self.session.command(template, **params))

    def safe_state(self) -> None:
        """Leave the instrument safe before closing (a supply switches its output off)."""

    def close(self) -> None:
        try:
            self.safe_state()
        finally:
            self.session.close()

    def __enter__(self):
        return self

    def __exit__(self, *exc) -> None:
        self.close()
