"""The template-product rule of planning: the same product (compared as identifiers are, by
``rules.names.fold``) passes, another product is refused naming both, no product passes."""

from __future__ import annotations

import pytest

from ledger.rules.planning import product_mismatch


def test_same_product_passes_whatever_its_case() -> None:
    assert product_mismatch("QB-MR-LNP-101", "QB-117", "QB-117") is None
    assert product_mismatch("QB-MR-LNP-101", "QB-117", "qb-117") is None


def test_a_template_without_a_product_passes() -> None:
    assert product_mismatch("T-1", None, "QB-204") is None


@pytest.mark.parametrize(
    ("template_product", "run_product"),
    [("QB-117", "QB-204"), ("QB-117", "QB-1170"), ("QB-117", "QB 117")],
)
def test_another_product_is_refused_naming_both(template_product: str, run_product: str) -> None:
    why = product_mismatch("QB-MR-LNP-101", template_product, run_product)
    assert why is not None
    assert "QB-MR-LNP-101" in why
    assert repr(template_product) in why and repr(run_product) in why
