"""Signature rules (ledger.rules.signing): order, roles, different people, no administrator,
and approval blocked by FAIL without a closed deviation, MISSING, or an open deviation.

The rules restate 21 CFR Part 11 §11.50/§11.70/§11.200 and EU GMP Annex 11 §14 as a site
configures them; the role list per meaning is common practice (no single source).
"""

from __future__ import annotations

import pytest

from ledger.rules.signing import Blocker, Signed, approval_blockers, refusals

ORDER = ("performed", "verified", "reviewed", "approved")
ROLES = {
    "performed": ("operator", "engineer"),
    "verified": ("operator", "engineer"),
    "reviewed": ("engineer", "qa"),
    "approved": ("qa",),
}
ALL_BEFORE = [Signed("performed", "op"), Signed("verified", "eng"), Signed("reviewed", "qa1")]


def test_the_first_signature_in_order_is_allowed() -> None:
    assert refusals("performed", "op", "operator", ORDER, ROLES, []) == []


def test_approval_after_the_others_by_a_fourth_person_is_allowed() -> None:
    assert refusals("approved", "qa2", "qa", ORDER, ROLES, ALL_BEFORE) == []


@pytest.mark.parametrize(
    ("meaning", "login", "role", "signed", "needle"),
    [
        ("approved", "qa2", "qa", [], "sign in order: performed, verified, reviewed first"),
        ("verified", "op", "operator", [Signed("performed", "op")], "different person"),
        ("reviewed", "op2", "operator", ALL_BEFORE[:2], "needs the role engineer or qa"),
        ("performed", "it", "admin", [], "administrators cannot sign"),
        (
            "performed",
            "eng",
            "engineer",
            [Signed("performed", "op")],
            "already signed as performed by op",
        ),
        ("released", "qa2", "qa", [], "not a signature meaning"),
    ],
)
def test_refusals_name_the_rule(
    meaning: str, login: str, role: str, signed: list[Signed], needle: str
) -> None:
    reasons = refusals(meaning, login, role, ORDER, ROLES, signed)
    assert any(needle in r for r in reasons), reasons


def test_a_meaning_the_template_does_not_ask_for_is_refused() -> None:
    reasons = refusals("reviewed", "qa1", "qa", ("performed", "approved"), ROLES, [])
    assert reasons == [
        "the master record asks for no 'reviewed' signature; it asks for performed, approved"
    ]


def test_every_reason_is_listed_not_only_the_first() -> None:
    reasons = refusals(
        "approved",
        "op",
        "admin",
        ORDER,
        ROLES,
        [Signed("performed", "op")],
        [Blocker("pdi", "MISSING")],
        [2],
    )
    assert len(reasons) == 5, reasons


@pytest.mark.parametrize(
    ("blocker", "expected"),
    [
        (Blocker("ph", "FAIL"), "check ph is FAIL and no deviation names it"),
        (Blocker("ph", "FAIL", 1, False), "check ph is FAIL and its deviation 1 is still open"),
        (Blocker("pdi", "MISSING"), "check pdi is MISSING: enter its result or correct the record"),
    ],
)
def test_approval_blockers(blocker: Blocker, expected: str) -> None:
    assert approval_blockers([blocker], []) == [expected]
    assert any(
        expected in r
        for r in refusals("approved", "qa2", "qa", ORDER, ROLES, ALL_BEFORE, [blocker])
    )


def test_a_fail_with_a_closed_deviation_does_not_block_approval() -> None:
    assert approval_blockers([Blocker("tmp", "FAIL", 1, True)], []) == []
    assert (
        refusals(
            "approved", "qa2", "qa", ORDER, ROLES, ALL_BEFORE, [Blocker("tmp", "FAIL", 1, True)]
        )
        == []
    )


def test_an_open_deviation_blocks_approval_but_not_earlier_signatures() -> None:
    assert approval_blockers([], [3]) == ["deviation 3 is open: close it before approval"]
    assert refusals("performed", "op", "operator", ORDER, ROLES, [], [], [3]) == []


# Which signature comes next, and when a revision is fully signed (sealed, approved).


@pytest.mark.parametrize(
    ("signed", "following"),
    [
        ([], "performed"),
        (["performed"], "verified"),
        (["performed", "verified"], "reviewed"),
        (["performed", "verified", "reviewed"], "approved"),  # one short of the edge
        (["performed", "verified", "reviewed", "approved"], None),  # the edge: all signed
    ],
)
def test_the_next_signature_follows_the_template_order(
    signed: list[str], following: str | None
) -> None:
    from ledger.rules.signing import fully_signed, next_meaning

    assert next_meaning(ORDER, signed) == following
    assert fully_signed(ORDER, signed) is (following is None)


def test_a_gap_in_the_order_is_the_next_signature() -> None:
    from ledger.rules.signing import fully_signed, next_meaning

    # A template asking for two meanings only; a signature of another meaning counts for none.
    assert next_meaning(("performed", "approved"), ["approved"]) == "performed"
    assert next_meaning(("performed", "approved"), ["performed", "reviewed"]) == "approved"
    assert not fully_signed(("performed", "approved"), ["performed", "reviewed"])
    assert fully_signed(("performed", "approved"), ["approved", "performed"])
