"""Safety cautions shown wherever readings are taken or a plan is printed (stdlib only).

Paraphrases docs section 6 of the domain primer; every export and the reading
entry screen show these lines unchanged.
"""

from __future__ import annotations

CAUTIONS: tuple[str, ...] = (
    "Oil under pressure can pierce the skin. An injection injury is a medical emergency "
    "even when the wound looks small. Never feel for a leak with your hand.",
    "Hot oil and hot surfaces burn. Accumulators keep pressure after the engine is shut down: "
    "release it before opening a line.",
    "Adjusting neutral with the engine running can make the machine move: block it, "
    "keep people clear and follow the maker's procedure.",
    "Follow the machine maker's service manual, your lockout/tagout practice and local "
    "regulations. This program plans maintenance; it is not a safety device and does not "
    "replace the judgement of a qualified technician.",
)

CAUTIONS_TITLE = "Cautions"
