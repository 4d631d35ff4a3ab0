"""The "How to read this report" section, in plain words for a reviewer who does not track for a living."""

from __future__ import annotations

from harbourwatch.report._data import REPLAY_STEP_S, SIMPLIFY_TOLERANCE_M
from harbourwatch.report._html import esc
from harbourwatch.report._hull import HULL_COURSE_MIN_KN

__all__ = ["how_to_read", "HOW_TO_READ"]

#: ``(term, explanation)`` pairs, shown as a definition list.
HOW_TO_READ: tuple[tuple[str, str], ...] = (
    ("What this is",
     "A review after the fact of one radar feed: every vessel the radars saw, worked out from "
     "the radar plots (single echoes, one per antenna turn), and the alerts raised by the "
     "rules you gave. It is an estimate, not a recording of what happened."),
    ("Trajectory",
     "The estimated path of one vessel, from the first to the last radar turn in which it was "
     "thought to be there. Each trajectory has an id (T1, T2, ...) made up by this run; the "
     "id is not the vessel's name and may differ from one run to the next. Lines are drawn "
     f"simplified to {SIMPLIFY_TOLERANCE_M:g} m."),
    ("Present and departed",
     "Solid blue: the vessel was still there at the end of the feed. Dashed orange: it left "
     "earlier (out of radar cover or out of sight)."),
    ("Probability",
     "How likely the rule really held, given the radar evidence: 1.00 means every plausible "
     "path of the vessel breaks the rule, 0.60 that six in ten do. An alert is raised when "
     "the probability reaches the rule's threshold (0.50 unless the rules file says "
     "otherwise). It includes the chance that the vessel exists at all rather than being "
     "clutter."),
    ("Hindsight",
     "The trajectories use the whole feed, later radar turns included, so they are smoother "
     "and more exact than anything a watchkeeper could see at the time."),
    ("As seen at the time",
     "The replay can instead show what the tool knew at each moment without looking ahead; "
     "it lags and wanders more. Use it to judge what could have been noticed then. The "
     f"replay moves in steps of {REPLAY_STEP_S:g} s."),
    ("Hull outlines",
     "A large vessel (several radar plots per turn) is drawn in the replay, and on its incident "
     "pages, as an ellipse of its estimated length and beam, to scale. An ellipse because that "
     "is the shape the tool estimates: the length and beam are its two axes, and a ship-shaped "
     "outline would add a bow and a stern that the plots do not show. The ellipse lies along "
     f"the vessel's course when it makes {HULL_COURSE_MIN_KN:g} kn or more; slower, along the "
     "main axis of its size estimate. The size is the tool's last estimate for the vessel, so a "
     "ship that lay still before it turned onto another heading is drawn, while still, along "
     "the later axis. As seen at the time, the outline appears once the tool judged the vessel "
     "large and takes the length known then; its proportions and, when slow, its direction "
     "come from the last estimate. The small dot ahead of the position still shows the "
     "direction of travel."),
    ("Ellipses and uncertainty",
     "A blue ellipse on an incident page is the 2-sigma area: the vessel was inside it with "
     "a probability of about 86 %. Positions are given as degrees and minutes (WGS84) with a "
     "plus-or-minus in metres: twice the 1-sigma position uncertainty."),
    ("Positions and distances",
     "Distances are in metres below one nautical mile (1,852 m) and in nautical miles (NM) "
     "above; speeds in knots; times in UTC, the date given once at the top of each page."),
    ("What the tool cannot see",
     "Vessels that give no radar echo (small, low, wooden or behind land or larger ships), "
     "anything outside the radars' range, and any time a radar was off (shaded in the "
     "plots-per-scan charts). Two vessels passing very close may swap ids, and one vessel "
     "may be split into two trajectories after a long gap. Radar alone knows no names: "
     "confirm identity and intent from other sources before acting."),
)


def how_to_read(replay_step_s: float = REPLAY_STEP_S) -> str:
    """The section's HTML (our own text, escaped like any other).

    ``replay_step_s`` is the replay's step when a long feed made it coarser
    (:func:`~harbourwatch.report._data.replay_step`).
    """
    said = f"steps of {REPLAY_STEP_S:g} s."
    longer = (f"steps of {replay_step_s:g} s (a long feed: the page would be too large at "
              f"{REPLAY_STEP_S:g} s; the tables keep every state).")
    items = "".join(f"<dt>{esc(k)}</dt><dd>{esc(v if replay_step_s == REPLAY_STEP_S else v.replace(said, longer))}</dd>"
                    for k, v in HOW_TO_READ)
    return (f'<h2 id="how-to-read">How to read this report</h2>'
            f'<dl class="hw-howto">{items}</dl>')
