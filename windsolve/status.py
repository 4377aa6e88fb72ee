"""The status vocabulary: every word a solve or a sweep row may report, with its meaning.

Every :attr:`windsolve.result.WindResult.status` and every sweep row's
``status`` is a key of :data:`STATUSES`; the result and sweep writers refuse
any other word (:func:`check_statuses`), and a test scans the package's
source for the status words its solvers write.  A new model's solver uses
these words; its one-line ``message`` says the rest.  Imports nothing.
"""

from typing import TYPE_CHECKING

if TYPE_CHECKING:
    from collections.abc import Iterable

__all__ = ["STATUSES", "check_statuses"]

STATUSES = {
    "converged": "a complete transonic solution through a saddle, out to the outer radius "
                 "(Model B: to the photosphere)",
    "no_critical_point": "no mass-loss rate gives a critical point: gravity wins everywhere, "
                         "or the gas is unbound from the base out",
    "no_saddle": "critical points exist but none is a saddle (X-type): no transonic solution",
    "stalled": "photon tiring uses up the luminosity: the flow stalls before it escapes",
    "second_singular_point": "the supersonic solution falls back to the sound speed (N != 0) "
                             "before the outer radius",
    "no_bracket": "no mass-loss rate with a critical point meets the base condition",
    "sonic_point_on_base": "the only candidate's sonic point lies on the base: it has no "
                           "subsonic part",
    "no_solution": "no steady transonic solution exists for these parameters",
    "off_table": "the solution leaves the opacity table (no opacity where it goes)",
    "fallback": "the matter above the photosphere does not escape (v_inf^2 <= 0)",
    "failed": "a numerical failure: an integration or iteration did not converge",
    "error": "a sweep row whose model could not be built or solved (the message says why)",
}


def check_statuses(statuses: "Iterable[str | None]", what: str = "status") -> None:
    """Refuse any status outside :data:`STATUSES`.

    Parameters
    ----------
    statuses : iterable of str
        The words to check (a missing one as ``None``).
    what : str
        How the message names them, e.g. ``"sweep row status"``.

    Raises
    ------
    ValueError
        A word that is not a key of :data:`STATUSES` (a solver or a plug-in
        model reporting a word nobody can look up); the message names it and
        the vocabulary.
    """
    unknown = set(statuses) - STATUSES.keys()
    if unknown:
        bad = ", ".join(sorted(repr(s) for s in unknown))
        raise ValueError(f"{what} {bad} is not in windsolve.status.STATUSES; a solver "
                         f"reports one of {', '.join(STATUSES)}")
