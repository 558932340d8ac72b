"""The RFC 6962 Merkle Tree Hash against the certificate-transparency reference test vectors."""

from __future__ import annotations

import hashlib

import numpy as np
import sqlalchemy as sa

from riskshape.store import Store, verify_chain
from riskshape.store.merkle import merkle_root
from tests.kit.archive import make_alerts

# Leaves and roots of the reference tests of the certificate-transparency / transparency-dev
# Merkle tree code (RFC 6962 test tree; values from memory, each root checked below for 1..8 leaves).
LEAVES = ["", "00", "10", "2021", "3031", "40414243", "5051525354555657", "606162636465666768696a6b6c6d6e6f"]
ROOTS = [
    "6e340b9cffb37a989ca544e6bb780a2c78901d3fb33738768511a30617afa01d",
    "fac54203e7cc696cf0dfcb42c92a1d9dbaf70ad9e621f4bd8d98662f00e3c125",
    "aeb6bcfe274b70a14fb067a5e5578264db0fa9b51af5e0ba159158f329e06e77",
    "d37ee418976dd95753c1c73862b9398fa2a2cf9b4ff0fdfe8b30cd95209614b7",
    "4e3bbb1f7b478dcfe71fb631631519a3bca12c9aefca1612bfce4c13a86264d4",
    "76e67dadbcdf1e10e1b74ddc608abd2f98dfb16fbce75277b5232a127f2087ef",
    "ddb89be403809e325750d3d263cd78929c2942b7942a34b77e122c9594a74c8c",
    "5dc9da79a70659a9ad559cb701ded9a2ab9d823aad2f4960cfe370eff4604328",
]


def test_reference_roots() -> None:
    leaves = [bytes.fromhex(h) for h in LEAVES]
    for n, root in enumerate(ROOTS, start=1):
        assert merkle_root(leaves[:n]) == root, n


def test_empty_tree_is_the_hash_of_nothing() -> None:
    # RFC 9162 section 2.1.1: MTH({}) = SHA-256() of the empty string.
    assert merkle_root([]) == hashlib.sha256(b"").hexdigest()


def test_verify_reports_the_root_of_the_entry_hashes(store: Store, run, rng: np.random.Generator) -> None:
    added = store.append_alerts(make_alerts(rng, 5), run.id).added
    report = verify_chain(store)
    with store.engine.connect() as connection:  # the two commitments (portfolio, run) come first
        entries = connection.execute(sa.text("SELECT entry_hash FROM ledger ORDER BY seq")).scalars().all()
    assert entries[2:] == [a.entry_hash for a in added] and len(entries) == 7
    assert report.merkle_root == merkle_root([bytes.fromhex(h) for h in entries])
