"""Test certificates, made with the `openssl` command-line tool at test time
in a temporary folder (nothing secret is committed, nothing expires in the
repository).

make_pki(folder) writes, all EC P-256 keys:
  ca.pem / ca.key                 the test CA
  other-ca.pem / other-ca.key     a second, unrelated CA
  server.pem / server.key         the server: CN localhost, SAN DNS:localhost and
                                  IP:127.0.0.1, signed by the test CA
  client.pem / client.key         a client certificate signed by the test CA
  other-client.pem / .key         a client certificate signed by the other CA
  expired-client.pem / .key       signed by the test CA, valid only on 1-2 January 2020
  expired-server.pem / .key       the same for the server's names
and returns {name: path}.

`openssl x509 -req` (OpenSSL 3.0) cannot date a certificate in the past;
`openssl ca` can, with -startdate and -enddate, from a minimal CA
configuration written here.
"""
import os
import subprocess

EC_KEY = ["-newkey", "ec", "-pkeyopt", "ec_paramgen_curve:prime256v1", "-nodes"]
SERVER_EXT = ("subjectAltName=DNS:localhost,IP:127.0.0.1\nbasicConstraints=CA:FALSE\n"
              "keyUsage=critical,digitalSignature\nextendedKeyUsage=serverAuth\n")
CLIENT_EXT = ("basicConstraints=CA:FALSE\nkeyUsage=critical,digitalSignature\n"
              "extendedKeyUsage=clientAuth\n")
CA_CONFIG = """[ ca ]
default_ca = test_ca
[ test_ca ]
database = {d}/index.txt
new_certs_dir = {d}/issued
serial = {d}/serial
default_md = sha256
policy = any_name
unique_subject = no
[ any_name ]
commonName = supplied
"""


def _openssl(folder, *args):
    p = subprocess.run(["openssl"] + list(args), cwd=folder, capture_output=True, text=True,
                       timeout=60)
    if p.returncode != 0:
        raise RuntimeError(f"openssl {' '.join(args)} failed: {p.stderr}")


def _write(folder, name, text):
    path = os.path.join(folder, name)
    with open(path, "w") as f:
        f.write(text)
    return path


def _ca(folder, name):
    _openssl(folder, "req", "-x509", *EC_KEY, "-keyout", f"{name}.key", "-out", f"{name}.pem",
             "-days", "2", "-subj", f"/CN=riskbound test {name}",
             "-addext", "basicConstraints=critical,CA:TRUE",
             "-addext", "keyUsage=critical,keyCertSign,cRLSign")


def _leaf(folder, name, ca, cn, ext, expired=False):
    _openssl(folder, "req", "-new", *EC_KEY, "-keyout", f"{name}.key", "-out", f"{name}.csr",
             "-subj", f"/CN={cn}")
    ext_file = _write(folder, f"{name}.ext", ext)
    if not expired:
        _openssl(folder, "x509", "-req", "-in", f"{name}.csr", "-CA", f"{ca}.pem",
                 "-CAkey", f"{ca}.key", "-CAcreateserial", "-days", "2",
                 "-extfile", ext_file, "-out", f"{name}.pem")
        return
    _openssl(folder, "ca", "-batch", "-config", "ca.cnf", "-cert", f"{ca}.pem",
             "-keyfile", f"{ca}.key", "-in", f"{name}.csr", "-out", f"{name}.pem",
             "-startdate", "20200101000000Z", "-enddate", "20200102000000Z",
             "-extfile", ext_file, "-notext")


def make_pki(folder):
    os.makedirs(os.path.join(folder, "issued"), exist_ok=True)
    _write(folder, "index.txt", "")
    _write(folder, "serial", "1000\n")
    _write(folder, "ca.cnf", CA_CONFIG.format(d=folder))
    _ca(folder, "ca")
    _ca(folder, "other-ca")
    _leaf(folder, "server", "ca", "localhost", SERVER_EXT)
    _leaf(folder, "client", "ca", "riskbound test client", CLIENT_EXT)
    _leaf(folder, "other-client", "other-ca", "riskbound test client", CLIENT_EXT)
    _leaf(folder, "expired-client", "ca", "riskbound expired client", CLIENT_EXT, expired=True)
    _leaf(folder, "expired-server", "ca", "localhost", SERVER_EXT, expired=True)
    names = ["ca", "other-ca", "server", "client", "other-client", "expired-client",
             "expired-server"]
    out = {}
    for n in names:
        out[n + ".pem"] = os.path.join(folder, n + ".pem")
        out[n + ".key"] = os.path.join(folder, n + ".key")
    return out


def read(path):
    with open(path, "rb") as f:
        return f.read()
