"""RFC 6962 / RFC 9162 (section 2.1.1) Merkle Tree Hash over the ledger's records (pure functions).

``MTH({}) = SHA-256()``, ``MTH({d}) = SHA-256(0x00 || d)``, and for n > 1 leaves
``MTH(D[n]) = SHA-256(0x01 || MTH(D[0:k]) || MTH(D[k:n]))`` with k the largest power of two
smaller than n. The ledger's leaves are the records' 32-byte entry hashes in ``seq`` order, so the
root commits to the whole history in one value (a tree head, with the record count).
"""

from __future__ import annotations

import hashlib
from collections.abc import Sequence

__all__ = ["merkle_root"]


def _mth(leaves: Sequence[bytes]) -> bytes:
    n = len(leaves)
    if n == 0:
        return hashlib.sha256(b"").digest()
    if n == 1:
        return hashlib.sha256(b"\x00" + leaves[0]).digest()
    k = 1 << ((n - 1).bit_length() - 1)  # largest power of two < n
    return hashlib.sha256(b"\x01" + _mth(leaves[:k]) + _mth(leaves[k:])).digest()


def merkle_root(leaves: Sequence[bytes]) -> str:
    r"""The Merkle Tree Hash (hex) of ``leaves``.

    Parameters
    ----------
    leaves : sequence of bytes
        Leaf data in order.

    Returns
    -------
    str
        64 hex digits.

    Examples
    --------
    The empty tree is SHA-256 of nothing; three leaves split 2 + 1 (RFC 9162, section 2.1.1):

    >>> merkle_root([]) == hashlib.sha256(b"").hexdigest()
    True
    >>> def sha(data):
    ...     return hashlib.sha256(data).digest()
    >>> a, b, c = b"first", b"second", b"third"
    >>> left = sha(b"\x01" + sha(b"\x00" + a) + sha(b"\x00" + b))
    >>> merkle_root([a, b, c]) == sha(b"\x01" + left + sha(b"\x00" + c)).hex()
    True
    """
    return _mth(leaves).hex()
