// The CLI's connection flags (client_cli/client.h): which transport a
// command uses, and when a token is refused. Loopback is 127.0.0.0/8 and ::1
// (Source: RFC 1122 section 3.2.1.3 and RFC 4291 section 2.5.3), plus the
// name localhost (RFC 6761 section 6.3).
#include <cstdlib>
#include <fstream>
#include <string>
#include <vector>

#include "client_cli/args.h"
#include "client_cli/client.h"
#include "gtest/gtest.h"

namespace riskbound::cli {
namespace {

absl::StatusOr<ClientOptions> OptionsFor(const std::vector<std::string>& words) {
  auto parsed = ParseArgs(ConnectionOptions(), words);
  if (!parsed.ok()) return parsed.status();
  return ClientOptionsFromArgs(*parsed);
}

class ConnectionTest : public ::testing::Test {
 protected:
  void SetUp() override {
    unsetenv("RISKBOUND_SERVER");
    unsetenv("RISKBOUND_AUTH_TOKEN");
  }
};

TEST_F(ConnectionTest, LoopbackAddresses) {
  for (const char* address : {"127.0.0.1:50051", "127.1.2.3:1", "localhost:50051",
                              "LOCALHOST:1", "[::1]:50051", "ipv4:127.0.0.1:5", "unix:/tmp/s",
                              "ipv4:127.0.0.1:5,127.0.0.2:6", "ipv6:[::1]:5,[::1]:6"}) {
    EXPECT_TRUE(IsLoopbackAddress(address)) << address;
  }
  for (const char* address : {"10.0.0.1:50051", "128.0.0.1:1", "127.0.0.1.example.com:1",
                              "riskbound.example.internal:50051", "[::2]:1", "[fe80::1]:1",
                              "localhost.example.com:1", "0.0.0.0:50051",
                              "ipv4:127.0.0.1:5,10.0.0.1:6", "ipv4:10.0.0.1:5,127.0.0.1:6"}) {
    EXPECT_FALSE(IsLoopbackAddress(address)) << address;
  }
}

TEST_F(ConnectionTest, PlaintextOnlyToLoopbackUnlessAsked) {
  auto local = OptionsFor({});
  ASSERT_TRUE(local.ok()) << local.status();
  EXPECT_TRUE(local->plaintext);  // the default server, 127.0.0.1:50051
  auto remote = OptionsFor({"--server", "riskbound.example.internal:50051"});
  ASSERT_TRUE(remote.ok());
  EXPECT_FALSE(remote->plaintext);
  auto asked = OptionsFor({"--server", "riskbound.example.internal:50051", "--plaintext"});
  ASSERT_TRUE(asked.ok());
  EXPECT_TRUE(asked->plaintext);
  auto named = OptionsFor({"--tls-server-name", "riskbound.example.internal"});
  ASSERT_TRUE(named.ok());
  EXPECT_FALSE(named->plaintext);  // any --tls-* flag means TLS, loopback or not
  EXPECT_EQ(named->tls_server_name, "riskbound.example.internal");
}

TEST_F(ConnectionTest, ConflictsAndHalvesAreRefused) {
  const std::string ca = ::testing::TempDir() + "/connection-ca.pem";
  std::ofstream(ca) << "not checked by the CLI\n";
  EXPECT_FALSE(OptionsFor({"--plaintext", "--tls-ca-file", ca}).ok());
  EXPECT_FALSE(OptionsFor({"--tls-cert-file", ca}).ok());
  EXPECT_FALSE(OptionsFor({"--tls-key-file", ca}).ok());
  auto missing = OptionsFor({"--tls-ca-file", "/nonexistent/ca.pem"});
  ASSERT_FALSE(missing.ok());
  EXPECT_NE(std::string(missing.status().message()).find("--tls-ca-file"), std::string::npos);
  auto read = OptionsFor({"--tls-ca-file", ca});
  ASSERT_TRUE(read.ok());
  EXPECT_EQ(read->tls_ca_pem, "not checked by the CLI\n");
}

TEST_F(ConnectionTest, TokenFromFileOrEnvironmentNeverInPlaintextOffLoopback) {
  const std::string file = ::testing::TempDir() + "/connection-token";
  std::ofstream(file) << "# the pipeline's token\n\n  from-the-file-0123456789  \n";
  auto from_file = OptionsFor({"--auth-token-file", file});
  ASSERT_TRUE(from_file.ok()) << from_file.status();
  EXPECT_EQ(from_file->auth_token, "from-the-file-0123456789");
  setenv("RISKBOUND_AUTH_TOKEN", "from-the-environment-0123", 1);
  auto from_env = OptionsFor({});
  ASSERT_TRUE(from_env.ok());
  EXPECT_EQ(from_env->auth_token, "from-the-environment-0123");
  auto file_wins = OptionsFor({"--auth-token-file", file});
  ASSERT_TRUE(file_wins.ok());
  EXPECT_EQ(file_wins->auth_token, "from-the-file-0123456789");
  auto exposed = OptionsFor({"--server", "10.0.0.7:50051", "--plaintext"});
  ASSERT_FALSE(exposed.ok());
  EXPECT_EQ(std::string(exposed.status().message()).find("from-the-environment"),
            std::string::npos);
  EXPECT_TRUE(OptionsFor({"--server", "10.0.0.7:50051"}).ok());  // TLS: allowed
  unsetenv("RISKBOUND_AUTH_TOKEN");
}

}  // namespace
}  // namespace riskbound::cli
