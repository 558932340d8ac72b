"""Helpers the tests share: invented asset codes, archive and service fixtures, the PostgreSQL probe."""
