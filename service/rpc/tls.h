// TLS and mutual TLS from PEM files, for the gRPC port and the HTTP port
// alike: the server's certificate chain and key, and, for mutual TLS, the CA
// certificates a client's certificate must chain to.
//
// The files are read once, at start (restart the server to use new ones),
// and checked with OpenSSL before anything listens, so that a wrong path, a
// key that does not belong to the certificate or a file that is not PEM
// stops the server with a message naming the flag, instead of failing every
// handshake later.
#ifndef RISKBOUND_SERVICE_RPC_TLS_H_
#define RISKBOUND_SERVICE_RPC_TLS_H_

#include <string>
#include <vector>

#include "absl/status/statusor.h"

namespace riskbound::rpc {

// The paths, as the flags give them.
struct TlsFiles {
  std::string cert_file;       // --tls-cert-file: the server's certificate chain, leaf first
  std::string key_file;        // --tls-key-file: its private key (unencrypted PEM)
  std::string client_ca_file;  // --tls-client-ca-file: empty for TLS without client certificates

  bool enabled() const { return !cert_file.empty(); }
  bool mutual() const { return !client_ca_file.empty(); }
};

// The files' contents, checked.
struct TlsMaterial {
  std::string cert_chain_pem;
  std::string key_pem;
  std::string client_ca_pem;  // empty unless mutual TLS
  // Things an operator should know that do not stop the server (a
  // certificate past its end date or not yet valid), one sentence each.
  std::vector<std::string> warnings;
};

// LoadTls
// Reads and checks the files: the chain holds at least one certificate, the
// key is a private key matching the first one, the client CA file holds at
// least one certificate. INVALID_ARGUMENT naming the flag and the path
// otherwise. REQUIRES: files.enabled() and a key file.
absl::StatusOr<TlsMaterial> LoadTls(const TlsFiles& files);

}  // namespace riskbound::rpc

#endif  // RISKBOUND_SERVICE_RPC_TLS_H_
