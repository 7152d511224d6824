#include "service/rpc/tls.h"

#include <fstream>
#include <memory>
#include <sstream>

#include <openssl/bio.h>
#include <openssl/err.h>
#include <openssl/evp.h>
#include <openssl/pem.h>
#include <openssl/x509.h>

#include "absl/strings/str_cat.h"

namespace riskbound::rpc {
namespace {

struct BioFree {
  void operator()(BIO* b) const { BIO_free(b); }
};
struct X509Free {
  void operator()(X509* x) const { X509_free(x); }
};
struct KeyFree {
  void operator()(EVP_PKEY* k) const { EVP_PKEY_free(k); }
};
using Bio = std::unique_ptr<BIO, BioFree>;
using Cert = std::unique_ptr<X509, X509Free>;
using Key = std::unique_ptr<EVP_PKEY, KeyFree>;

absl::StatusOr<std::string> ReadFile(const char* flag, const std::string& path) {
  std::ifstream in(path, std::ios::binary);
  if (!in) return absl::InvalidArgumentError(absl::StrCat(flag, ": cannot read ", path));
  std::stringstream buffer;
  buffer << in.rdbuf();
  if (in.bad()) return absl::InvalidArgumentError(absl::StrCat(flag, ": cannot read ", path));
  return buffer.str();
}

Bio MemoryBio(const std::string& pem) {
  return Bio(BIO_new_mem_buf(pem.data(), static_cast<int>(pem.size())));
}

// Every certificate of a PEM text, in order.
std::vector<Cert> Certificates(const std::string& pem) {
  std::vector<Cert> out;
  Bio bio = MemoryBio(pem);
  while (X509* x = PEM_read_bio_X509(bio.get(), nullptr, nullptr, nullptr)) out.emplace_back(x);
  ERR_clear_error();  // the end of the text reads as an error
  return out;
}

}  // namespace

absl::StatusOr<TlsMaterial> LoadTls(const TlsFiles& files) {
  TlsMaterial out;
  auto chain = ReadFile("--tls-cert-file", files.cert_file);
  if (!chain.ok()) return chain.status();
  auto key = ReadFile("--tls-key-file", files.key_file);
  if (!key.ok()) return key.status();
  std::vector<Cert> certs = Certificates(*chain);
  if (certs.empty()) {
    return absl::InvalidArgumentError(absl::StrCat(
        "--tls-cert-file: no PEM certificate in ", files.cert_file));
  }
  Key private_key;
  {
    Bio bio = MemoryBio(*key);
    private_key.reset(PEM_read_bio_PrivateKey(bio.get(), nullptr, nullptr, nullptr));
    ERR_clear_error();
  }
  if (private_key == nullptr) {
    return absl::InvalidArgumentError(absl::StrCat(
        "--tls-key-file: no unencrypted PEM private key in ", files.key_file));
  }
  if (X509_check_private_key(certs[0].get(), private_key.get()) != 1) {
    ERR_clear_error();
    return absl::InvalidArgumentError(absl::StrCat(
        "--tls-key-file: the key in ", files.key_file,
        " does not belong to the first certificate of ", files.cert_file));
  }
  if (X509_cmp_current_time(X509_get0_notAfter(certs[0].get())) < 0) {
    out.warnings.push_back(absl::StrCat("the certificate in ", files.cert_file,
                                        " has expired: clients will refuse it"));
  } else if (X509_cmp_current_time(X509_get0_notBefore(certs[0].get())) > 0) {
    out.warnings.push_back(absl::StrCat("the certificate in ", files.cert_file,
                                        " is not valid yet: clients will refuse it"));
  }
  out.cert_chain_pem = *std::move(chain);
  out.key_pem = *std::move(key);
  if (files.mutual()) {
    auto ca = ReadFile("--tls-client-ca-file", files.client_ca_file);
    if (!ca.ok()) return ca.status();
    if (Certificates(*ca).empty()) {
      return absl::InvalidArgumentError(absl::StrCat(
          "--tls-client-ca-file: no PEM certificate in ", files.client_ca_file));
    }
    out.client_ca_pem = *std::move(ca);
  }
  return out;
}

}  // namespace riskbound::rpc
