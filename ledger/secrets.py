"""Masking secrets in text that is about to be shown: URL passwords and secret parameters."""

from __future__ import annotations

import re

MASK = "***"

# scheme://user:password@ — the password runs to the last "@" of the URL (an unescaped "@"
# in a password is common), so a hostname is masked with it rather than a password shown.
_USERINFO = re.compile(r"(?P<head>\b[A-Za-z][A-Za-z0-9+.-]*://[^\s:/?#@'\"]*:)[^\s'\"]*@")
# password=..., ?token=..., &api_key=... (also libpq's "password=... host=..." form).
_SECRET_NAMES = r"(?:[A-Za-z0-9]+[_-])*(?:password|passwd|pass|pwd|token|key|secret)"
_PARAMETER = re.compile(
    rf"(?P<head>(?:^|(?<=[?&;\s,({{\[\"']))(?P<name>{_SECRET_NAMES})=)[^&;#\s'\")}}\]]*",
    re.IGNORECASE,
)


def mask_secrets(text: str) -> str:
    """``text`` with every URL userinfo password and every value of a parameter named
    password, pass, pwd, token, key or secret (or ending in ``_key``, ``-token``...)
    replaced by ``***``. Idempotent: masking masked text changes nothing."""
    text = _USERINFO.sub(lambda m: f"{m['head']}{MASK}@", text)
    return _PARAMETER.sub(lambda m: f"{m['head']}{MASK}", text)
