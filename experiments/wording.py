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
