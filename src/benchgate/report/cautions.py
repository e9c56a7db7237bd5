"""The safety cautions every report carries, beside the plan's own cautions and hazards.

The same words as the README's safety section, short enough to read on one screen; a printed
report that travels without the README still carries them.
"""

from __future__ import annotations

#: shown in every unit report and every lot summary.
GENERAL_CAUTIONS: tuple[str, ...] = (
    "Bench power: set the current limit before switching on, and know where the supply's own "
    "output switch and the bench's emergency stop are; never rely on software alone to remove power.",
    "Mains-powered units: test them only if you are trained and authorised to; use an isolation "
    "transformer, keep one hand away, and never defeat an earth.",
    "ESD: handle boards at an ESD-safe workstation with a wrist strap.",
    "Hot parts and charged capacitors: regulators and resistors get hot; capacitors can stay "
    "charged after power-off.",
)
