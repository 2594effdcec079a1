"""The documentation table of the allocation rules and policies, made from the registry.

``python -m allocation.rules_table > docs/rules.md`` regenerates it; a test
checks that the committed table matches the registry.
"""
from __future__ import annotations


def _flags(rule) -> str:
    flags = []
    if getattr(rule, "baseline", False):
        flags.append("conventional baseline")
    if getattr(rule, "default", False):
        flags.append("round-trip default")
    if getattr(rule, "peak", False):
        flags.append("peak default")
    if getattr(rule, "headline", False):
        flags.append("the destination control of the decision unless one is named")
    if rule.max_batch:
        flags.append(f"batches of at most {rule.max_batch} passengers")
    return "; ".join(flags) or "-"


def rules_markdown() -> str:
    from .registry import POLICIES, RULES
    lines = ["# Allocation rules and policies", "",
             "Made from the registry by `python -m allocation.rules_table`; do not edit by hand.",
             "The contract every entry follows is in `allocation/contract.py`.", "",
             "## Batch rules", "",
             "A batch rule shares a batch of registered passengers between the cars open to "
             "allocation: a round's passengers in the round-trip Monte Carlo (`liftsort compare`), "
             "the registrations of one allocation window in the peak simulation "
             "(`liftsort peak`, delayed allocation).", "",
             "| rule | what it does | source or rationale | flags |", "|---|---|---|---|"]
    for rule in RULES.values():
        lines.append(f"| `{rule.name}` | {rule.summary} | {rule.source} | {_flags(rule)} |")
    lines += ["", "## Immediate policies", "",
              "An immediate policy gives one passenger a car as they register, irrevocably, from "
              "the cars' state (stops already promised, load, time until the car leaves); used "
              "by the peak simulation (`liftsort peak`).", "",
              "| policy | what it does | source or rationale | flags |", "|---|---|---|---|"]
    for policy in POLICIES.values():
        lines.append(f"| `{policy.name}` | {policy.summary} | {policy.source} | {_flags(policy)} |")
    lines += ["", "## Cars open to allocation", "",
              "A batch rule shares each allocation between the cars open to it. In the "
              "round-trip Monte Carlo a round's cars are split into sub-batches of k cars open "
              "(`--cars-open K`); with every car open the figure is the *ideal bound*: every "
              "passenger of a round known at once and shared between cars that in fact leave "
              "one interval apart, which no real destination control reaches.", "",
              "The *realisable* value, the default of `liftsort size`, is **2**. In up-peak a "
              "destination system allocates a passenger when they register at the lobby, and "
              "the only cars it can still give them are those that will load at the lobby "
              "before the passenger would give up: the car loading there now and the next one "
              "to arrive. With intervals of 20 to 40 s and a loading time of 10 to 20 s "
              "(common practice for office groups), a third car is an interval or more away "
              "and is not open to the same registrations; one car open is conventional control. "
              "The peak simulation (`liftsort peak`) finds the cars open from the cars' state "
              "instead of assuming it.", "",
              "## The destination control of the decision", "",
              "`liftsort report`, `demo` and `size` state their answer for one destination "
              "control, declared here before any result is seen (never the best of several "
              "after the fact): `least-added-time`, the policy that weighs each passenger's "
              "wait against the delay their stop adds to those already given the car, the "
              "form in which destination control is usually described (common practice). "
              "`--destination-control NAME` names another.", "",
              "Every rule carries, car by car, the passengers conventional control would give "
              "that car (its *room*), in each direction apart when a batch holds both, so all "
              "rules are compared at the same car load."]
    return "\n".join(lines) + "\n"


if __name__ == "__main__":
    print(rules_markdown(), end="")
