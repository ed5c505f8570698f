"""The cautions every human-readable output carries, by chemistry family.

Built in, not in the profiles, so no user profile can remove them. A profile's
own ``cautions`` are added after these.
"""

from __future__ import annotations

from collections.abc import Iterable
from typing import Any

__all__ = ["DEFERRAL", "caution_groups", "caution_text", "cautions_for", "groups_text",
           "profile_cautions"]

LEAD_ACID = (
    "Charging lead-acid makes hydrogen, which explodes at 4 % in air: charge only in a "
    "ventilated place (IEC 62485-2 cl. 7) and keep sparks, flames and smoking at least 0.5 m "
    "away.",
    "Connect the leads before switching the charger on, and switch it off before "
    "disconnecting, so no spark is struck at the terminals.",
    "Battery acid burns skin and eyes: wear eye protection and acid-resistant gloves, and keep "
    "water or an eyewash at hand.",
    "Never charge a frozen battery: if the case bulges or the electrolyte may be frozen, let it "
    "thaw at room temperature first.",
    "Stop charging if the battery gets hot, swells, hisses or smells of rotten eggs.",
)

VENTED = (
    "Flooded cells vent hydrogen and acid mist freely, most of all during absorption and "
    "equalization: keep the vent caps in place and the room aired.",
)

LITHIUM = (
    "Lithium cells can go into thermal runaway and burn fiercely: charge on a non-combustible "
    "surface, away from anything that burns, and do not leave the charge unattended.",
    "Never charge lithium below 0 °C cell temperature: lithium metal plates on the anode and "
    "can short the cell later. Bring a cold battery indoors and wait until the cells are above "
    "0 °C.",
    "Use a lithium charge mode only: no equalization, desulfation, recovery or other "
    "high-voltage stage, and no float or trickle on NMC.",
    "Do not charge a swollen, damaged, leaking or hot pack; move it outdoors onto sand or "
    "concrete.",
)

DEFERRAL = (
    "This plan does not replace the battery maker's datasheet, local codes or licensed "
    "practice: where they differ from it, they win."
)


def cautions_for(
    family: str, *, vented: bool, extra: list[str] | tuple[str, ...] = ()
) -> list[str]:
    """The cautions for a chemistry family, the profile's own, then the deferral line."""
    base = list(LITHIUM if family == "lithium" else LEAD_ACID)
    if vented:
        base += VENTED
    return [*base, *extra, DEFERRAL]


def profile_cautions(profile: Any) -> list[str]:
    """A profile's cautions, as every plan of it carries them (rule CP603): its family's,
    the vented line where it vents, its own, then the deferral line. The one list that
    plans, cards, sheets and the reading commands print."""
    return cautions_for(profile.family, vented=profile.vented, extra=profile.cautions)


FAMILY_LABELS = {"lead_acid": "Lead-acid", "lithium": "Lithium"}


def caution_groups(profiles: Iterable[Any]) -> list[tuple[str, list[str]]]:
    """The cautions of every profile given, once each, grouped by family ("Lead-acid
    (flooded, AGM)", "Lithium (LiFePO4)"), without the deferral line (a document shows it
    once, apart)."""
    names: dict[str, list[str]] = {}
    lines: dict[str, list[str]] = {}
    for profile in sorted({id(p): p for p in profiles}.values(), key=lambda p: p.id):
        label = FAMILY_LABELS.get(profile.family, profile.family)
        if profile.name not in names.setdefault(label, []):
            names[label].append(profile.name)
        seen = lines.setdefault(label, [])
        seen.extend(line for line in profile_cautions(profile)[:-1] if line not in seen)
    return [(f"{label} ({', '.join(names[label])})", lines[label]) for label in sorted(lines)]


def caution_text(cautions: list[str]) -> str:
    """A caution list (the deferral line last, as :func:`cautions_for` makes it) as plain
    text for a terminal: a heading, a line per caution, then the deferral."""
    *lines, deferral = cautions
    return "\n".join(["Cautions", *(f"  * {line}" for line in lines), deferral]) + "\n"


def groups_text(groups: list[tuple[str, list[str]]]) -> str:
    """Cautions grouped by family (as :func:`caution_groups` gives them) as plain text for a
    terminal: a heading, each group's name and lines, then the deferral."""
    lines = ["Cautions"]
    for label, cautions in groups:
        lines += [f"  {label}:", *(f"    * {line}" for line in cautions)]
    return "\n".join([*lines, DEFERRAL]) + "\n"
