"""The caution every comparison carries (its text and ``compare.json``), and the notes
that close every verdict."""

CAUTION = ("Estimates only: confirm against measurements and component ratings; "
           "product-safety standards, local codes and qualified engineering review take "
           "precedence over these results.")


def closing_notes(a, b) -> list[str]:
    """What closes the verdict of any comparison of sides ``a`` and ``b``: their warnings,
    a depth that differs, and the caution."""
    parts = []
    for side in (a, b):
        n = len(side.summary.get("warnings", []))
        if n:
            parts.append(f"{side.label} has {n} warning{'s' if n > 1 else ''}: see its "
                         "summary.")
    if a.summary["units"].get("powers_and_heat_flows_for") != \
            b.summary["units"].get("powers_and_heat_flows_for"):
        parts.append("Powers and heat flows are for a different depth in A and B.")
    return parts + [CAUTION]
