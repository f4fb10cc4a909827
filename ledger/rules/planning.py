"""What planning a run requires of its template: the template's product is the run's.

Plain values in, the refusal in words out (None: no objection). Products are identifiers,
compared as ``rules.names`` compares them (case-folded).
"""

from __future__ import annotations

from ledger.rules.names import fold, shown


def product_mismatch(
    template_id: str, template_product: str | None, run_product: str
) -> str | None:
    """Why a run of ``run_product`` may not follow a template written for another product;
    None when the products are the same or the template names no product."""
    if template_product is None or fold(template_product) == fold(run_product):
        return None
    return (
        f"template {shown(template_id)} is written for product {shown(template_product)}, "
        f"not for {shown(run_product)}"
    )
