"""Fixed wording shared by the command line, the report and the README."""

CAUTION = (
    "Caution: liftsort's results are planning estimates under stated, simplified "
    "assumptions. Final lift design must follow the local codes and standards and be "
    "checked by a qualified lift engineer, with full simulation of the traffic where needed."
)


def count_of(n, noun: str, plural: str | None = None) -> str:
    """``n`` with its noun in the right number: "1 car", "3 cars", "1 passenger"."""
    word = noun if n == 1 else (plural or noun + "s")
    return f"{n:,} {word}" if isinstance(n, int) else f"{n:g} {word}"
WAITING_TIME_LEFT_OUT = (
    "The waiting time is left out: the up-peak waiting-time estimate holds only for up-peak "
    "traffic at a load the group carries. The peak simulation (liftsort peak) gives waiting "
    "times for any case it covers."
)
