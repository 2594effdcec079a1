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
    return "\n".join(lines) + "\n"


if __name__ == "__main__":
    print(rules_markdown(), end="")
