"""The canonical text of a study file and its SHA-256: what identifies a snapshot.

A study can be written as JSON in many ways (key order, spacing, ``2`` or ``2.0``,
``"é"`` or ``"\\u00e9"``). Its *canonical text* is the one way Baton writes it, so that
the same study always gives the same bytes and so the same hash, whichever database
stored it and whichever process wrote it.

How a study becomes its canonical text
--------------------------------------
1. The core writes the study as its study file: ``study_to_json(study)`` (format
   version 1, with only the keys the study sets, values normalised as the reader
   normalises them). Sorting keys then loses the order in which a plan lists its
   assignments or a mode its overrides; Baton gives that order no meaning.
2. Baton checks that this JSON value has a canonical text, and refuses it with
   :class:`CanonicalError`, naming the value's path (``$.tasks[1].window_s``), when it
   holds NaN or an infinity, a string or key with a lone surrogate, a key that is not a
   string, a value of another type, or a whole number beyond ±(2**53 − 1).
3. The value is written by the ``rfc8785`` package, an implementation of the JSON
   Canonicalization Scheme (JCS, RFC 8785 [1]_): keys sorted by their UTF-16 code units
   (§3.2.3), no whitespace (§3.2.1), strings and numbers as ECMAScript's
   ``JSON.stringify`` writes them (§3.2.2; numbers as the shortest digits that read back
   to the same double [2]_: ``2`` for ``2.0``, ``0.000001``, ``1e-7``, ``1e+21``, ``0``
   for ``-0``), encoded as UTF-8 with no byte-order mark and no final newline (§3.2.4).

Whole numbers beyond ±(2**53 − 1) = ±9,007,199,254,740,991
    RFC 8785 reads every JSON number as a double (I-JSON, RFC 7493 §2.2 [3]_), which
    holds whole numbers exactly only up to 2**53. The ``rfc8785`` package refuses a
    larger integer rather than round it, and Baton refuses it too, with its path, so a
    snapshot never holds a number other than the one the study holds. The study reader
    bounds rates and probabilities but not durations, lags or bin widths; seconds beyond
    2**53 (285 million years) are a typing mistake, and the snapshot service reports them
    as a problem of the study. A *double* that large (``1e20`` in the file) is written,
    ``100000000000000000000``, and read back as a double (:func:`read_canonical`).

Forms
-----
A snapshot records which canonical form its text is in, and is verified in that form:

``"rfc8785"`` (:data:`RFC_8785`, :data:`CURRENT_FORM`)
    the form above; every new snapshot.
``"baton-1"`` (:data:`BATON_1`)
    the form Baton wrote itself before adopting the ``rfc8785`` package, kept only to
    verify and read snapshots taken then. It is RFC 8785 in every respect except one: a
    whole number beyond ±(2**53 − 1) keeps every digit (``1152921504606846977``) where the
    current form refuses it. Texts without such numbers are byte for byte the same in
    both forms, so their hashes are too.

References
----------
.. [1] Rundgren, A., Jordan, B., & Erdtman, S. (2020). JSON Canonicalization Scheme
   (JCS). RFC 8785, IETF. https://www.rfc-editor.org/rfc/rfc8785
.. [2] ECMA-262, ECMAScript Language Specification, Number::toString and
   JSON.stringify (the number and string forms RFC 8785 adopts).
.. [3] Bray, T. (2015). The I-JSON Message Format. RFC 7493, IETF (§2.2, numbers).
.. [4] NIST (2015). Secure Hash Standard (SHS). FIPS PUB 180-4 (SHA-256).
"""

from __future__ import annotations

import hashlib
import json
import math
import re
from collections.abc import Callable
from typing import Any

import rfc8785

from .errors import BatonError
from .model import Study
from .reading import child_path
from .writing import study_to_json

__all__ = [
    "BATON_1",
    "CURRENT_FORM",
    "FORMS",
    "RFC_8785",
    "SAFE_INTEGER",
    "CanonicalError",
    "canonical_json",
    "canonical_text",
    "check_json",
    "digest",
    "is_canonical",
    "read_canonical",
    "study_digest",
    "verify",
]

#: The form Baton wrote itself before it adopted the ``rfc8785`` package.
BATON_1 = "baton-1"
#: RFC 8785 as the ``rfc8785`` package writes it.
RFC_8785 = "rfc8785"
#: The form every new snapshot is written in.
CURRENT_FORM = RFC_8785
#: Every form, with what it is (for the snapshot model's choices).
FORMS = {
    BATON_1: "Baton's own, before RFC 8785 was adopted",
    RFC_8785: "RFC 8785 (JSON Canonicalization Scheme)",
}
#: The largest whole number a double holds exactly with all its neighbours:
#: 2**53 − 1 (ECMAScript's Number.MAX_SAFE_INTEGER; RFC 7493 §2.2).
SAFE_INTEGER = 2**53 - 1

_SURROGATE = re.compile("[\ud800-\udfff]")


class CanonicalError(BatonError):
    """A value that has no canonical text (a lone surrogate, NaN, an unknown type).

    Attributes
    ----------
    path : str
        The value's JSON path in the reader's notation (``$.tasks[1].window_s``).
    reason : str
        What is wrong with it, without the path.
    """

    def __init__(self, path: str, reason: str):
        self.path = path
        self.reason = reason
        super().__init__(f"{path}: {reason}")


class _Refused(Exception):
    """Raised deep in a value; each level adds its key on the way out, so that a path is
    only built for the one value refused."""

    def __init__(self, reason: str):
        self.reason = reason
        self.keys: list[str | int] = []


def _form(form: str) -> str:
    if form not in FORMS:
        raise ValueError(f"unknown canonical form {form!r}; known: {', '.join(FORMS)}")
    return form


def check_json(value: Any, form: str = CURRENT_FORM) -> None:
    """Refuse, with its path, a JSON value that has no canonical text in ``form``.

    Parameters
    ----------
    value : dict, list, tuple, str, int, float, bool or None
        A JSON value as :func:`study_to_json` or :func:`json.loads` returns it.
    form : str
        :data:`RFC_8785` (the default) or :data:`BATON_1`; only the first refuses whole
        numbers beyond ±:data:`SAFE_INTEGER`.

    Raises
    ------
    CanonicalError
        For NaN or an infinity, a string or key holding a lone surrogate (UTF-8 cannot
        encode it), a key that is not a string, a value of another type, or (in the
        RFC 8785 form) a whole number beyond ±(2**53 − 1); the first one found, with its
        path.

    References
    ----------
    .. [1] RFC 8785, §3.2.2 (I-JSON data only: no NaN, no infinities, no lone
       surrogates) and Appendix D (numbers beyond what a double holds exactly).
    .. [2] RFC 7493, §2.1 and §2.2 (I-JSON strings and numbers).
    """
    limit = SAFE_INTEGER if _form(form) == RFC_8785 else None
    try:
        _check(value, limit)
    except _Refused as refused:
        path = "$"
        for key in reversed(refused.keys):
            path = child_path(path, key)
        raise CanonicalError(path, refused.reason) from None


def _check(value: Any, limit: int | None) -> None:
    # bool before int: True is an int in Python.
    if value is None or isinstance(value, bool):
        return
    if isinstance(value, str):
        if _SURROGATE.search(value):
            raise _Refused(f"holds a lone surrogate in {value!r}, which UTF-8 cannot encode")
    elif isinstance(value, int):
        if limit is not None and not -limit <= value <= limit:
            raise _Refused(
                f"is {value}; a canonical text (RFC 8785) holds whole numbers only up to "
                f"±{limit:,} (2**53 − 1), beyond which doubles skip some: use a smaller one"
            )
    elif isinstance(value, float):
        if not math.isfinite(value):
            raise _Refused(f"is {value}, which JSON cannot hold")
    elif isinstance(value, list | tuple):
        for index, item in enumerate(value):
            try:
                _check(item, limit)
            except _Refused as refused:
                refused.keys.append(index)
                raise
    elif isinstance(value, dict):
        for key, item in value.items():
            if not isinstance(key, str):
                raise _Refused(f"has the key {key!r}, which is not a string")
            if _SURROGATE.search(key):
                raise _Refused(f"has the key {key!r} with a lone surrogate")
            try:
                _check(item, limit)
            except _Refused as refused:
                refused.keys.append(key)
                raise
    else:
        raise _Refused(f"is a {type(value).__name__}, which JSON cannot hold")


def canonical_json(value: Any, form: str = CURRENT_FORM) -> str:
    """The canonical JSON text of a JSON value (see the module docstring).

    Parameters
    ----------
    value : dict, list, tuple, str, int, float, bool or None
        A JSON value as :func:`json.loads` returns it (tuples are taken as lists).
    form : str
        :data:`RFC_8785` (the default, written by ``rfc8785.dumps``) or :data:`BATON_1`
        (only to verify snapshots taken before).

    Returns
    -------
    str
        The text; encode it as UTF-8 for its bytes.

    Raises
    ------
    CanonicalError
        For a value that has no canonical text, naming its path (see
        :func:`check_json`).
    ValueError
        For an unknown ``form``.

    References
    ----------
    .. [1] RFC 8785, §3.2 (serialization of primitives, sorting of properties, UTF-8).

    Examples
    --------
    >>> canonical_json({"b": [1.0, 0.5, 1e21], "a": "é\\n"})
    '{"a":"é\\\\n","b":[1,0.5,1e+21]}'
    >>> canonical_json(2**60 + 1, form=BATON_1)
    '1152921504606846977'
    """
    check_json(value, form)
    if form == RFC_8785:
        return rfc8785.dumps(value).decode("utf-8")
    parts: list[str] = []
    _write_baton_1(value, parts)
    return "".join(parts)


def _write_baton_1(value: Any, parts: list[str]) -> None:
    """The form of :data:`BATON_1`, for a value :func:`check_json` has passed."""
    if value is None:
        parts.append("null")
    elif value is True:
        parts.append("true")
    elif value is False:
        parts.append("false")
    elif isinstance(value, int):
        parts.append(str(value))
    elif isinstance(value, float):
        parts.append(_number(value))
    elif isinstance(value, str):
        # Python's encoder escapes exactly what JSON.stringify escapes once ensure_ascii
        # is off: quote, backslash, and U+0000..U+001F (short forms, else \u00xx).
        parts.append(json.dumps(value, ensure_ascii=False))
    elif isinstance(value, list | tuple):
        parts.append("[")
        for index, item in enumerate(value):
            if index:
                parts.append(",")
            _write_baton_1(item, parts)
        parts.append("]")
    else:
        parts.append("{")
        # RFC 8785 §3.2.3: sorted by UTF-16 code units (big-endian bytes compare as the
        # units do).
        for index, key in enumerate(sorted(value, key=lambda key: key.encode("utf-16-be"))):
            if index:
                parts.append(",")
            parts.append(json.dumps(key, ensure_ascii=False))
            parts.append(":")
            _write_baton_1(value[key], parts)
        parts.append("}")


def _number(value: float) -> str:
    """A finite double as ECMAScript's Number::toString writes it (ECMA-262; RFC 8785
    §3.2.2.3)."""
    if value == 0:
        return "0"
    sign = "-" if value < 0 else ""
    # repr gives the shortest digits that read back to the same double, the digits
    # ECMAScript uses too; only their layout differs.
    mantissa, _, exponent = repr(abs(value)).partition("e")
    whole, _, fraction = mantissa.partition(".")
    digits = (whole + fraction).lstrip("0")
    trailing = len(digits) - len(digits.rstrip("0"))
    digits = digits.rstrip("0")
    k = len(digits)
    # value = digits × 10^(n − k)
    n = int(exponent or 0) - len(fraction) + trailing + k
    if k <= n <= 21:
        text = digits + "0" * (n - k)
    elif 0 < n <= 21:
        text = f"{digits[:n]}.{digits[n:]}"
    elif -6 < n <= 0:
        text = "0." + "0" * (-n) + digits
    else:
        power = n - 1
        mark = "+" if power > 0 else "-"
        head = digits if k == 1 else f"{digits[0]}.{digits[1:]}"
        text = f"{head}e{mark}{abs(power)}"
    return sign + text


def canonical_text(study: Study) -> str:
    """The canonical text of a study in the current form (:data:`CURRENT_FORM`).

    Parameters
    ----------
    study : Study
        A study as the core reads it (``load_study(data).study``).

    Returns
    -------
    str
        ``canonical_json(study_to_json(study))``.

    Raises
    ------
    CanonicalError
        For a value of the study that has no canonical text (a whole number beyond
        ±(2**53 − 1)), naming its path in the study file.

    References
    ----------
    .. [1] RFC 8785, §3.2 (the text), via the ``rfc8785`` package.
    """
    return canonical_json(study_to_json(study))


def digest(text: str) -> str:
    """The SHA-256 of a text's UTF-8 bytes, as 64 lower-case hexadecimal digits.

    References
    ----------
    .. [1] FIPS PUB 180-4, Secure Hash Standard, §6.2 (SHA-256).
    """
    return hashlib.sha256(text.encode("utf-8")).hexdigest()


def study_digest(study: Study) -> str:
    """The SHA-256 of a study's canonical text: the identity of a snapshot of it."""
    return digest(canonical_text(study))


def _double_if_unsafe(literal: str) -> int | float:
    # RFC 8785 reads every number as a double: a whole number written without fraction
    # or exponent beyond 2**53 − 1 is that double (100000000000000000000 is 1e20).
    number = int(literal)
    return number if -SAFE_INTEGER <= number <= SAFE_INTEGER else float(literal)


_INTEGERS: dict[str, Callable[[str], int | float]] = {BATON_1: int, RFC_8785: _double_if_unsafe}


def read_canonical(text: str, form: str = CURRENT_FORM) -> Any:
    """The JSON value a canonical text holds, its numbers read as ``form`` means them.

    Parameters
    ----------
    text : str
        A text in canonical form ``form``.
    form : str
        :data:`RFC_8785` (the default) reads a whole number beyond ±(2**53 − 1) as the
        double it denotes; :data:`BATON_1` reads it as the integer its digits spell.

    Returns
    -------
    dict, list, str, int, float, bool or None
        The value, which :func:`canonical_json` in the same form writes back as ``text``.

    Raises
    ------
    ValueError
        When ``text`` is not JSON, or ``form`` is unknown.

    References
    ----------
    .. [1] RFC 8785, §3.2.2.3 and Appendix B (numbers are IEEE 754 doubles).
    """
    return json.loads(text, parse_int=_INTEGERS[_form(form)])


def is_canonical(text: str, form: str = CURRENT_FORM) -> bool:
    """Whether ``text`` is a JSON text written canonically in ``form``: it parses
    (without repeated keys, NaN or infinities) and writing what it holds canonically in
    that form gives it back. An unknown ``form`` is never canonical.

    References
    ----------
    .. [1] RFC 8785, §3.2 (the one text of each value) and §3.1 (unique keys).
    """
    if form not in FORMS:
        return False
    try:
        value = json.loads(
            text, object_pairs_hook=_unique, parse_constant=_refuse, parse_int=_INTEGERS[form]
        )
        return canonical_json(value, form) == text
    except (ValueError, CanonicalError):
        return False


def _unique(pairs: list[tuple[str, Any]]) -> dict[str, Any]:
    keys = [key for key, _ in pairs]
    if len(set(keys)) != len(keys):
        raise ValueError("repeated key")
    return dict(pairs)


def _refuse(name: str) -> Any:
    raise ValueError(f"{name} is not JSON")


def verify(text: str, sha256: str, form: str = CURRENT_FORM) -> bool:
    """Whether a stored text still matches its hash and is still canonical in ``form``.

    A changed byte changes the hash (FIPS 180-4); a text edited and re-hashed by hand
    would still be caught if it is no longer in canonical form.

    Parameters
    ----------
    text : str
        The stored canonical text.
    sha256 : str
        Its stored SHA-256, 64 lower-case hexadecimal digits.
    form : str
        The form it was written in: :data:`RFC_8785` (the default) or, for snapshots
        taken before Baton adopted it, :data:`BATON_1`.

    References
    ----------
    .. [1] FIPS PUB 180-4, §6.2 (SHA-256); RFC 8785, §3.2 (the canonical text).
    """
    return digest(text) == sha256 and is_canonical(text, form)
