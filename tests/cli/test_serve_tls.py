"""``riskshape serve --tls-cert/--tls-key``: the service answers HTTPS with the given certificate
(a self-signed one made here with the ``cryptography`` package), and the options go together.
"""

from __future__ import annotations

import datetime
import ipaddress
import os
import ssl
import subprocess
import sys
import time
from pathlib import Path

import httpx
import pytest

from riskshape.cli import main
from tests.kit.service import free_port

STARTUP_SECONDS = 90  # a bound on waiting, not a speed requirement


def _self_signed(folder: Path) -> tuple[Path, Path]:
    from cryptography import x509
    from cryptography.hazmat.primitives import hashes, serialization
    from cryptography.hazmat.primitives.asymmetric import ec
    from cryptography.x509.oid import NameOID

    key = ec.generate_private_key(ec.SECP256R1())
    name = x509.Name([x509.NameAttribute(NameOID.COMMON_NAME, "127.0.0.1")])
    now = datetime.datetime.now(datetime.timezone.utc)
    cert = (
        x509.CertificateBuilder()
        .subject_name(name)
        .issuer_name(name)
        .public_key(key.public_key())
        .serial_number(x509.random_serial_number())
        .not_valid_before(now - datetime.timedelta(minutes=5))
        .not_valid_after(now + datetime.timedelta(days=1))
        .add_extension(x509.SubjectAlternativeName([x509.IPAddress(ipaddress.ip_address("127.0.0.1"))]), False)
        .sign(key, hashes.SHA256())
    )
    cert_path, key_path = folder / "cert.pem", folder / "key.pem"
    cert_path.write_bytes(cert.public_bytes(serialization.Encoding.PEM))
    key_path.write_bytes(
        key.private_bytes(serialization.Encoding.PEM, serialization.PrivateFormat.PKCS8, serialization.NoEncryption())
    )
    return cert_path, key_path


def test_serve_speaks_https_with_the_given_certificate(tmp_path: Path) -> None:
    cert, key = _self_signed(tmp_path)
    port = free_port()
    url = f"sqlite:///{tmp_path / 'archive.sqlite'}"
    command = [sys.executable, "-m", "riskshape", "serve", "--store", url, "--port", str(port)]
    log = tmp_path / "serve.log"
    with log.open("wb") as sink:
        process = subprocess.Popen(
            [*command, "--tls-cert", str(cert), "--tls-key", str(key)],
            stdout=subprocess.DEVNULL,
            stderr=sink,
            env={**os.environ, "RISKSHAPE_LOG_LEVEL": "warning"},
        )
    try:
        context = ssl.create_default_context(cafile=str(cert))
        deadline = time.monotonic() + STARTUP_SECONDS
        while True:
            try:
                response = httpx.get(f"https://127.0.0.1:{port}/v1/health", verify=context, timeout=5)
                break
            except httpx.TransportError:
                assert process.poll() is None, log.read_text()
                assert time.monotonic() < deadline, "the service did not start"
                time.sleep(0.3)
        assert response.status_code == 200
        assert response.headers["X-Content-Type-Options"] == "nosniff"
        with pytest.raises(httpx.TransportError):  # plain HTTP is not answered on that port
            httpx.get(f"http://127.0.0.1:{port}/v1/health", timeout=5)
    finally:
        process.terminate()
        process.wait(timeout=30)


def test_tls_options_go_together(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    cert, _ = _self_signed(tmp_path)
    with pytest.raises(SystemExit) as ended:
        main(["serve", "--store", f"sqlite:///{tmp_path / 'a.sqlite'}", "--tls-cert", str(cert)])
    assert ended.value.code == 2
    assert "give --tls-cert and --tls-key together" in capsys.readouterr().err
