"""mask_secrets: no URL password and no secret parameter survives, everything else does."""

from __future__ import annotations

from urllib.parse import parse_qsl, quote, urlsplit

from hypothesis import example, given
from hypothesis import strategies as st

from ledger.secrets import MASK, mask_secrets

SECRET_NAMES = ["password", "pass", "pwd", "token", "key", "secret", "api_key", "Access-Token",
                "PASSWORD", "client_secret"]  # fmt: skip
PLAIN_NAMES = ["sslmode", "options", "host", "keyword", "monkey", "passage", "user", "mode"]

word = st.text(alphabet="abcdefghijklmnopqrstuvwxyz0123456789", min_size=1, max_size=12)
# Passwords as people choose them, percent-encoded the way a URL carries them.
raw_secret = st.text(alphabet=st.characters(codec="utf-8", exclude_categories=["Cs"]),
                     min_size=1, max_size=20)  # fmt: skip
encoded = raw_secret.map(lambda s: quote(s, safe=""))


@st.composite
def urls(draw: st.DrawFn) -> tuple[str, str | None, dict[str, str]]:
    """(url, password or None, {secret parameter: value})."""
    scheme = draw(st.sampled_from(["postgresql", "postgresql+psycopg", "https", "http",
                                   "mysql", "sqlite"]))  # fmt: skip
    user = draw(word)
    password = draw(st.none() | encoded)
    host = draw(word) + draw(st.sampled_from(["", ".example", ":5432", ".lab:8080"]))
    path = "/" + draw(word)
    params = draw(st.lists(st.tuples(st.sampled_from(SECRET_NAMES + PLAIN_NAMES), encoded),
                           max_size=4, unique_by=lambda p: p[0].lower()))  # fmt: skip
    userinfo = user + (f":{password}" if password is not None else "") + "@"
    query = "&".join(f"{k}={v}" for k, v in params)
    url = f"{scheme}://{userinfo}{host}{path}" + (f"?{query}" if query else "")
    secrets = {k: v for k, v in params if k in SECRET_NAMES}
    return url, password, secrets


@given(urls())
@example(("postgresql://bob:s3cret@db/x?password=also&sslmode=require", "s3cret",
          {"password": "also"}))  # fmt: skip
def test_generated_urls_keep_no_secret(case: tuple[str, str | None, dict[str, str]]) -> None:
    url, password, secrets = case
    masked = mask_secrets(url)
    parts, original = urlsplit(masked), urlsplit(url)
    assert parts.scheme == original.scheme and parts.path == original.path
    assert parts.hostname == original.hostname and parts.username == original.username
    assert parts.password == (MASK if password is not None else None)
    got = dict(parse_qsl(parts.query, keep_blank_values=True))
    for name, value in dict(parse_qsl(original.query, keep_blank_values=True)).items():
        assert got[name] == (MASK if name in secrets else value), name
    assert mask_secrets(masked) == masked  # idempotent


@given(urls(), st.sampled_from(["cannot open {}: refused", "'{}'", "({})", "--tsa {}: no"]))
def test_urls_inside_messages_are_masked(
    case: tuple[str, str | None, dict[str, str]], template: str
) -> None:
    url, password, secrets = case
    text = mask_secrets(template.format(url))
    # What follows the URL may be taken for part of a value (":" is legal in one): masking
    # more is the safe side, so only the text before the URL must stay as it was.
    assert text.startswith(template.split("{}")[0] + url.split("://")[0] + "://")
    if password is not None:
        assert f":{password}@" not in text and f":{MASK}@" in text
    for name, value in secrets.items():
        assert f"{name}={value}" not in text and f"{name}={MASK}" in text


def test_unescaped_at_sign_in_a_password_hides_the_whole_password() -> None:
    # Over-masking (the host goes too) is the safe side when a password holds a raw "@".
    masked = mask_secrets("postgresql://bob:p@ss@db.lab/x")
    assert "p@ss" not in masked and "ss@" not in masked and masked.startswith("postgresql://bob:")


def test_text_without_secrets_is_unchanged() -> None:
    for text in ("sqlite:////tmp/a.db", "http://tsa.lab/ts?policy=1", "key point", "user@host",
                 "no time stamp from this time-stamp authority (timed out)"):  # fmt: skip
        assert mask_secrets(text) == text


def test_libpq_key_value_strings_are_masked() -> None:
    assert mask_secrets("host=db password=hunter2 user=bob") == "host=db password=*** user=bob"
