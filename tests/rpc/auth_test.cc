// Bearer tokens (service/rpc/auth.h) and the transport choice of StartServer.
// The token grammar is RFC 6750 section 2.1 (b64token); the scheme's case
// rule is RFC 7235 section 2.1. The real binary's TLS, mutual TLS, SIGHUP and
// log checks are in tests/integration/security_test.py.
#include "service/rpc/auth.h"

#include <condition_variable>
#include <cstdio>
#include <fstream>
#include <mutex>
#include <string>
#include <vector>

#include "absl/strings/str_cat.h"
#include "gmock/gmock.h"
#include "grpcpp/create_channel.h"
#include "grpcpp/generic/generic_stub.h"
#include "gtest/gtest.h"
#include "riskbound/v1/riskbound.grpc.pb.h"
#include "service/rpc/server.h"
#include "tests/testing/loopback_server.h"
#include "tests/testing/status_matchers.h"

namespace riskbound::rpc {
namespace {

using ::testing::ElementsAre;
using ::testing::HasSubstr;
using ::testing::Not;
using riskbound::testing::StatusIs;

constexpr char kTokenA[] = "0123456789abcdef0123456789abcdef";
constexpr char kTokenB[] = "rotated.token-with_all~chars+/==";

std::string TempFile(const std::string& name, const std::string& text) {
  const std::string path = ::testing::TempDir() + "/" + name;
  std::ofstream(path) << text;
  return path;
}

TEST(ParseTokenFileTest, OneTokenALineCommentsAndBlanksSkipped) {
  auto tokens = ParseTokenFile(absl::StrCat("# comment\n\n  ", kTokenA, "  \r\n", kTokenB, "\n"));
  ASSERT_TRUE(tokens.ok()) << tokens.status();
  EXPECT_THAT(*tokens, ElementsAre(kTokenA, kTokenB));
}

TEST(ParseTokenFileTest, BadLinesNamedByNumberNeverQuoted) {
  // Source: RFC 6750 section 2.1: spaces, quotes and '=' before the end are
  // not b64token characters.
  for (const std::string& bad : {std::string("two words but long enough"),
                                 std::string("quote\"inside-long-enough"),
                                 std::string("equals=inside-long-enough")}) {
    auto tokens = ParseTokenFile(absl::StrCat(kTokenA, "\n", bad, "\n"));
    EXPECT_EQ(tokens.status().code(), absl::StatusCode::kInvalidArgument) << bad;
    EXPECT_THAT(std::string(tokens.status().message()), HasSubstr("line 2")) << bad;
    EXPECT_THAT(std::string(tokens.status().message()), Not(HasSubstr(bad)));
  }
  auto short_token = ParseTokenFile("abc123\n");
  EXPECT_EQ(short_token.status().code(), absl::StatusCode::kInvalidArgument);
  EXPECT_THAT(std::string(short_token.status().message()), Not(HasSubstr("abc123")));
  EXPECT_EQ(ParseTokenFile("# only a comment\n\n").status().code(),
            absl::StatusCode::kInvalidArgument);
}

TEST(TokenAuthenticatorTest, ChecksTheSchemeAndEveryToken) {
  auto auth = TokenAuthenticator::Load(
      TempFile("tokens-check", absl::StrCat(kTokenA, "\n", kTokenB, "\n")));
  ASSERT_TRUE(auth.ok()) << auth.status();
  EXPECT_EQ((*auth)->token_count(), 2);
  EXPECT_TRUE((*auth)->Check(absl::StrCat("Bearer ", kTokenA)));
  EXPECT_TRUE((*auth)->Check(absl::StrCat("Bearer ", kTokenB)));
  // Source: RFC 7235 section 2.1: the scheme is case-insensitive.
  EXPECT_TRUE((*auth)->Check(absl::StrCat("bEaReR  ", kTokenA)));
  EXPECT_FALSE((*auth)->Check(kTokenA));                          // no scheme
  EXPECT_FALSE((*auth)->Check(absl::StrCat("Basic ", kTokenA)));  // another scheme
  EXPECT_FALSE((*auth)->Check(absl::StrCat("Bearer", kTokenA)));  // no space
  EXPECT_FALSE((*auth)->Check("Bearer "));
  EXPECT_FALSE((*auth)->Check(""));
  std::string off_by_one = kTokenA;
  off_by_one.back() = 'e';
  EXPECT_FALSE((*auth)->Check(absl::StrCat("Bearer ", off_by_one)));
  EXPECT_FALSE((*auth)->Check(absl::StrCat("Bearer ", kTokenA, "0")));  // a longer one
  EXPECT_FALSE((*auth)->Check(absl::StrCat("Bearer ", std::string(kTokenA).substr(0, 31))));
}

TEST(TokenAuthenticatorTest, ReloadReplacesOrKeepsTheTokens) {
  const std::string path = TempFile("tokens-reload", absl::StrCat(kTokenA, "\n"));
  auto auth = TokenAuthenticator::Load(path);
  ASSERT_TRUE(auth.ok()) << auth.status();
  std::ofstream(path) << kTokenB << "\n";
  auto count = (*auth)->Reload();
  ASSERT_TRUE(count.ok()) << count.status();
  EXPECT_EQ(*count, 1);
  EXPECT_FALSE((*auth)->Check(absl::StrCat("Bearer ", kTokenA)));
  EXPECT_TRUE((*auth)->Check(absl::StrCat("Bearer ", kTokenB)));
  std::ofstream(path) << "short\n";
  EXPECT_THAT((*auth)->Reload(), StatusIs(absl::StatusCode::kInvalidArgument));
  EXPECT_TRUE((*auth)->Check(absl::StrCat("Bearer ", kTokenB)));  // kept
  std::remove(path.c_str());
  EXPECT_FALSE((*auth)->Reload().ok());
  EXPECT_TRUE((*auth)->Check(absl::StrCat("Bearer ", kTokenB)));
}

TEST(StartServerTest, TransportMustBeChosen) {
  ServerConfig config;
  config.listen_address = "127.0.0.1:0";
  EXPECT_THAT(StartServer(config), StatusIs(absl::StatusCode::kInvalidArgument));
  config.plaintext = true;
  config.tls.cert_file = "/nonexistent/cert.pem";
  config.tls.key_file = "/nonexistent/key.pem";
  EXPECT_THAT(StartServer(config), StatusIs(absl::StatusCode::kInvalidArgument));
  config.plaintext = false;
  auto missing = StartServer(config);
  EXPECT_THAT(missing, StatusIs(absl::StatusCode::kInvalidArgument));
  EXPECT_THAT(std::string(missing.status().message()), HasSubstr("--tls-cert-file"));
}

TEST(StartServerTest, TokensGuardTheApiNotHealth) {
  ServerConfig config;
  config.listen_address = "127.0.0.1:0";
  config.plaintext = true;
  config.auth_token_file = TempFile("tokens-server", absl::StrCat(kTokenA, "\n"));
  auto server = StartServer(config);
  ASSERT_TRUE(server.ok()) << server.status();
  auto channel = grpc::CreateChannel("127.0.0.1:" + std::to_string((*server)->port()),
                                     grpc::InsecureChannelCredentials());
  auto stub = v1::RiskBound::NewStub(channel);
  v1::ListFamiliesResponse families;
  auto refused = testing::CallContext();
  EXPECT_EQ(stub->ListFamilies(refused.get(), {}, &families).error_code(),
            grpc::StatusCode::UNAUTHENTICATED);
  auto allowed = testing::CallContext();
  allowed->AddMetadata("authorization", absl::StrCat("Bearer ", kTokenA));
  EXPECT_TRUE(stub->ListFamilies(allowed.get(), {}, &families).ok());
  EXPECT_GT(families.families_size(), 0);
  // grpc.health.v1.Health/Check with an empty request, no token: SERVING
  // (HealthCheckResponse{status: SERVING} is 08 01, grpc/health/v1/health.proto).
  grpc::GenericStub generic(channel);
  grpc::Slice empty("", 0);
  grpc::ByteBuffer request(&empty, 1), response;  // HealthCheckRequest{}: no bytes
  auto health = testing::CallContext();
  std::mutex mu;
  std::condition_variable cv;
  bool done = false;
  grpc::Status status;
  generic.UnaryCall(health.get(), "/grpc.health.v1.Health/Check", grpc::StubOptions(), &request,
                    &response, [&](grpc::Status s) {
                      std::lock_guard<std::mutex> lock(mu);
                      status = std::move(s);
                      done = true;
                      cv.notify_one();
                    });
  std::unique_lock<std::mutex> lock(mu);
  cv.wait(lock, [&] { return done; });
  ASSERT_TRUE(status.ok()) << status.error_message();
  std::vector<grpc::Slice> slices;
  ASSERT_TRUE(response.Dump(&slices).ok());
  std::string bytes;
  for (const auto& s : slices) bytes.append(reinterpret_cast<const char*>(s.begin()), s.size());
  EXPECT_EQ(bytes, std::string("\x08\x01", 2));
  EXPECT_THAT((*server)->metrics()->Render(),
              HasSubstr("riskbound_calls_refused_total{reason=\"unauthenticated\"} 1"));
}

}  // namespace
}  // namespace riskbound::rpc
