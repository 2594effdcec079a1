"""Fixed wording shared by the command line, the report and the README."""

CAUTION = (
    "Caution: liftsort's results are planning estimates under stated, simplified "
    "assumptions. Final lift design must follow the local codes and standards and be "
    "checked by a qualified lift engineer, with full simulation of the traffic where needed."
)
