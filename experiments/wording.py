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

#: How a client report names each control: by what it does (the command-line name in
#: brackets where it differs, so that a reader can rerun it).
CLIENT_NAMES = {
    "random": "conventional",
    "conventional": "conventional",
    "sorted": "destination grouping, floors sorted into equal groups",
    "sectors": "destination grouping by fixed floor bands",
    "fewest-stops": "destination grouping, fewest added stops",
    "best": "best possible sharing of a small batch (a bound)",
    "round-robin": "cars in turn (worked example)",
    "earliest-leaving": "destination control, first car to leave",
    "same-floor-first": "destination control, joining a car already stopping at the floor",
    "least-added-time": "destination control, least added time",
}


def client_name(name: str, with_key: bool = True) -> str:
    """The client report's name of control ``name`` ("conventional" for the baseline)."""
    words = CLIENT_NAMES.get(name, name)
    if not with_key or words == "conventional" or words == name:
        return words
    return f"{words} ('{name}')"


def client_source(text: str) -> str:
    """A rule's source as a client report shows it: the published source, without the
    developers' note of how it was recalled (kept in docs/rules.md and the code)."""
    import re
    text = re.sub(r"\s*\((?:values )?(?:recalled )?from memory\)", "", text)
    text = re.sub(r"[,;]\s*(?:values )?(?:recalled )?from memory", "", text)
    return text.replace("  ", " ").strip()
