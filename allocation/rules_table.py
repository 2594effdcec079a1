"""The documentation table of the allocation rules, made from the registry.

``python -m allocation.rules_table > docs/rules.md`` regenerates it; a test
checks that the committed table matches the registry.
"""
from __future__ import annotations


def rules_markdown() -> str:
    from .registry import RULES
    lines = ["# Allocation rules", "",
             "Made from the registry by `python -m allocation.rules_table`; do not edit by hand.",
             "", "| rule | what it does | source or rationale |", "|---|---|---|"]
    for rule in RULES.values():
        extra = f" (batches of at most {rule.max_batch} passengers)" if rule.max_batch else ""
        lines.append(f"| `{rule.name}` | {rule.summary}{extra} | {rule.source} |")
    return "\n".join(lines) + "\n"


if __name__ == "__main__":
    print(rules_markdown(), end="")
