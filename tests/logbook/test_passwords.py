"""The password policy: length after stripping surrounding whitespace, no whitespace-only
password, no common password (case-insensitive), and the shipped list itself."""

from __future__ import annotations

import pytest
from hypothesis import given
from hypothesis import strategies as st

from ledger.errors import InputError
from ledger.logbook.passwords import MIN_PASSWORD, check_password, common_passwords

WHITESPACE = " \t\n\r\x0b\x0c\u00a0\u2003\u3000"


@given(st.text(alphabet=WHITESPACE, max_size=200))
def test_only_whitespace_is_refused(password: str) -> None:
    with pytest.raises(InputError, match="only whitespace"):
        check_password(password)


@given(st.text(alphabet="abcdefghjkmnpqrstuvwxyz23456789-", min_size=1, max_size=MIN_PASSWORD - 1))
def test_shorter_than_the_minimum_is_refused(core: str) -> None:
    with pytest.raises(InputError, match=f"at least {MIN_PASSWORD} characters"):
        check_password(core)


def test_length_boundary_counts_without_surrounding_whitespace() -> None:
    exact = "kx7-vq2-mz"  # invented, exactly the minimum
    assert len(exact) == MIN_PASSWORD
    check_password(exact)
    with pytest.raises(InputError, match=f"is {MIN_PASSWORD - 1} characters long"):
        check_password("   " + exact[:-1] + "\t\t")  # padding does not count


@given(st.sampled_from(sorted(common_passwords())), st.randoms(use_true_random=False))
def test_common_password_is_refused_in_any_case(word: str, rnd: object) -> None:
    mixed = "".join(c.upper() if rnd.random() < 0.5 else c for c in word)  # type: ignore[attr-defined]
    with pytest.raises(InputError, match="common passwords"):
        check_password(f" {mixed} ")


def test_list_holds_known_common_passwords_and_only_lower_case() -> None:
    # "qwertyuiop" and "1234567890" are keyboard runs found in every published leak list
    # (common practice, recalled from memory); the list is lower-cased when written.
    words = common_passwords()
    assert {"qwertyuiop", "1234567890", "password123"} <= words
    assert all(w == w.lower() and len(w) >= MIN_PASSWORD for w in words)


def test_test_and_demo_passwords_pass_the_policy() -> None:
    from tests.world import PASSWORDS

    for password in [*PASSWORDS.values(), "bench-pass-2026"]:
        check_password(password)
