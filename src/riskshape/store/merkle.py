"""RFC 6962 / RFC 9162 (section 2.1.1) Merkle Tree Hash over the ledger's records (pure functions).

``MTH({}) = SHA-256()``, ``MTH({d}) = SHA-256(0x00 || d)``, and for n > 1 leaves
``MTH(D[n]) = SHA-256(0x01 || MTH(D[0:k]) || MTH(D[k:n]))`` with k the largest power of two
smaller than n. The ledger's leaves are the records' 32-byte entry hashes in ``seq`` order, so the
root commits to the whole history in one value (a tree head, with the record count).
"""

from __future__ import annotations

import hashlib
from collections.abc import Sequence

__all__ = ["merkle_root", "leaf_hash", "root_of_leaf_hashes"]


def leaf_hash(data: bytes) -> bytes:
    """RFC 6962's hash of one leaf: SHA-256(0x00 || data)."""
    return hashlib.sha256(b"\x00" + data).digest()


def root_of_leaf_hashes(hashes: Sequence[bytes]) -> str:
    """The Merkle Tree Hash (hex) of leaves given by their :func:`leaf_hash` values.

    Built level by level from the leaves up: pairing neighbours and carrying an unpaired last node up
    unchanged gives the same tree as RFC 6962's split at the largest power of two below n (the left
    subtree is always complete), without recursion.
    """
    if not hashes:
        return hashlib.sha256(b"").hexdigest()
    level = list(hashes)
    while len(level) > 1:
        paired = [hashlib.sha256(b"\x01" + level[i] + level[i + 1]).digest() for i in range(0, len(level) - 1, 2)]
        if len(level) % 2:
            paired.append(level[-1])
        level = paired
    return level[0].hex()


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
    return root_of_leaf_hashes([leaf_hash(leaf) for leaf in leaves])
