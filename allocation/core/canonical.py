"""The canonical text of a study file and its SHA-256: what identifies a snapshot.

A study can be written as JSON in many ways (key order, spacing, ``2`` or ``2.0``,
``"é"`` or ``"\\u00e9"``). Its *canonical text* is the one way Baton writes it, so that
the same study always gives the same bytes and so the same hash, whichever database
stored it and whichever process wrote it.

What "canonical" means here
---------------------------
The study goes through the core first: ``study_to_json(study)`` (the study file,
format version 1, with only the keys the study sets). That JSON value is then written
following the JSON Canonicalization Scheme (JCS, RFC 8785) in spirit:

- objects with their keys sorted by their UTF-16 code units (RFC 8785 §3.2.3), which
  for keys in the Basic Multilingual Plane is the order of their code points;
- no whitespace at all: ``,`` between items, ``:`` between key and value;
- strings as ECMAScript's ``JSON.stringify`` writes them (RFC 8785 §3.2.2.2): UTF-8
  text, with only ``"``, ``\\``, and the control characters below U+0020 escaped (the
  short forms ``\\b \\t \\n \\f \\r`` where they exist, ``\\u00xx`` in lower case
  otherwise);
- numbers as ECMAScript writes a double (RFC 8785 §3.2.2.3): the shortest digits that
  read back to the same double, ``2`` for ``2.0``, ``0.000001`` and ``1e-7``,
  ``1e+21``; ``-0`` as ``0``;
- ``true``, ``false`` and ``null`` as themselves; the whole text encoded as UTF-8 with
  no byte-order mark and no final newline.

Where Baton differs from RFC 8785:

- the input is not any JSON value but a study, read and checked by the core and written
  back by :func:`~allocation.core.writing.study_to_json` (keys the study leaves out are
  not written, values are normalised as the reader normalises them);
- whole numbers given as integers keep every digit, even beyond 2**53, where RFC 8785
  would first round them to a double (no study has such numbers; exactness wins);
- a string holding a lone surrogate, a non-string key, NaN or an infinity is refused
  with :class:`CanonicalError` instead of being written (the study reader refuses
  non-finite numbers already);
- sorting keys loses the order in which a plan lists its assignments or a mode its
  overrides; Baton gives that order no meaning.

References
----------
.. [1] Rundgren, A., Jordan, B., & Erdtman, S. (2020). JSON Canonicalization Scheme
   (JCS). RFC 8785, IETF. https://www.rfc-editor.org/rfc/rfc8785
.. [2] ECMA-262, ECMAScript Language Specification, Number::toString and
   JSON.stringify (the number and string forms RFC 8785 adopts).
.. [3] NIST (2015). Secure Hash Standard (SHS). FIPS PUB 180-4 (SHA-256).
"""

from __future__ import annotations

import hashlib
import json
import math
from typing import Any

from .errors import BatonError
from .model import Study
from .writing import study_to_json

__all__ = [
    "CanonicalError",
    "canonical_json",
    "canonical_text",
    "digest",
    "is_canonical",
    "study_digest",
    "verify",
]


class CanonicalError(BatonError):
    """A value that has no canonical text (a lone surrogate, NaN, an unknown type)."""

    def __init__(self, path: str, message: str):
        self.path = path
        super().__init__(f"{path}: {message}")


def canonical_json(value: Any) -> str:
    """The canonical JSON text of a JSON value (see the module docstring).

    Parameters
    ----------
    value : dict, list, str, int, float, bool or None
        A JSON value as :func:`json.loads` returns it (tuples are taken as lists).

    Returns
    -------
    str
        The text; encode it as UTF-8 for its bytes.

    Raises
    ------
    CanonicalError
        For a value JSON cannot carry exactly, naming its path (``$.tasks[2].title``).

    References
    ----------
    .. [1] RFC 8785, §3.2 (serialization of primitives and sorting of properties).

    Examples
    --------
    >>> canonical_json({"b": [1.0, 0.5, 1e21], "a": "é\\n"})
    '{"a":"é\\\\n","b":[1,0.5,1e+21]}'
    """
    parts: list[str] = []
    _write(value, "$", parts)
    return "".join(parts)


def _write(value: Any, path: str, parts: list[str]) -> None:
    # bool before int: True is an int in Python.
    if value is None:
        parts.append("null")
    elif value is True:
        parts.append("true")
    elif value is False:
        parts.append("false")
    elif isinstance(value, int):
        parts.append(str(value))
    elif isinstance(value, float):
        parts.append(_number(value, path))
    elif isinstance(value, str):
        parts.append(_string(value, path))
    elif isinstance(value, list | tuple):
        parts.append("[")
        for index, item in enumerate(value):
            if index:
                parts.append(",")
            _write(item, f"{path}[{index}]", parts)
        parts.append("]")
    elif isinstance(value, dict):
        for key in value:
            if not isinstance(key, str):
                raise CanonicalError(path, f"has the key {key!r}, which is not a string")
        parts.append("{")
        for index, key in enumerate(sorted(value, key=lambda key: _utf16(key, path))):
            if index:
                parts.append(",")
            parts.append(_string(key, path))
            parts.append(":")
            _write(value[key], f"{path}[{json.dumps(key, ensure_ascii=False)}]", parts)
        parts.append("}")
    else:
        raise CanonicalError(path, f"is a {type(value).__name__}, which JSON cannot hold")


def _utf16(key: str, path: str) -> bytes:
    """The sort key of RFC 8785 §3.2.3: the string's UTF-16 code units (big-endian
    bytes compare as the units do)."""
    try:
        return key.encode("utf-16-be")
    except UnicodeEncodeError:
        raise CanonicalError(path, f"has the key {key!r} with a lone surrogate") from None


def _string(text: str, path: str) -> str:
    if any(0xD800 <= ord(char) <= 0xDFFF for char in text):
        raise CanonicalError(path, f"holds a lone surrogate in {text!r}")
    # Python's encoder escapes exactly what JSON.stringify escapes once ensure_ascii
    # is off: quote, backslash, and U+0000..U+001F (short forms, else \u00xx in lower case).
    return json.dumps(text, ensure_ascii=False)


def _number(value: float, path: str) -> str:
    """A double as ECMAScript's Number::toString writes it (ECMA-262; RFC 8785 §3.2.2.3)."""
    if not math.isfinite(value):
        raise CanonicalError(path, f"is {value}, which JSON cannot hold")
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
    """The canonical text of a study: its study file, written canonically.

    Parameters
    ----------
    study : Study
        A study as the core reads it (``load_study(data).study``).

    Returns
    -------
    str
        ``canonical_json(study_to_json(study))``.
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


def is_canonical(text: str) -> bool:
    """Whether ``text`` is a JSON text written canonically: it parses (without repeated
    keys, NaN or infinities) and writing what it holds canonically gives it back."""
    try:
        value = json.loads(text, object_pairs_hook=_unique, parse_constant=_refuse)
        return canonical_json(value) == text
    except (ValueError, CanonicalError):
        return False


def _unique(pairs: list[tuple[str, Any]]) -> dict[str, Any]:
    keys = [key for key, _ in pairs]
    if len(set(keys)) != len(keys):
        raise ValueError("repeated key")
    return dict(pairs)


def _refuse(name: str) -> Any:
    raise ValueError(f"{name} is not JSON")


def verify(text: str, sha256: str) -> bool:
    """Whether a stored text still matches its hash and is still canonical.

    A changed byte changes the hash (FIPS 180-4); a text edited and re-hashed by hand
    would still be caught if it is no longer in canonical form.
    """
    return digest(text) == sha256 and is_canonical(text)
