"""Fixed wording shared by the command line, the report and the README."""

CAUTION = (
    "Caution: liftsort's results are planning estimates under stated, simplified "
    "assumptions. Final lift design must follow the local codes and standards and be "
    "checked by a qualified lift engineer, with full simulation of the traffic where needed."
)

WAITING_TIME_LEFT_OUT = (
    "The waiting time is left out: the up-peak waiting-time estimate holds only for up-peak "
    "traffic at a load the group carries. The peak simulation (liftsort peak) gives waiting "
    "times for any case it covers."
)
