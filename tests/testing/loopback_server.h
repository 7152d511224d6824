// A riskbound server started in the test process on a free loopback port
// (127.0.0.1:0, port read back), with a stub over a real channel. Tests never
// use a fixed port.
#ifndef RISKBOUND_TESTS_TESTING_LOOPBACK_SERVER_H_
#define RISKBOUND_TESTS_TESTING_LOOPBACK_SERVER_H_

#include <chrono>
#include <memory>
#include <string>

#include "grpcpp/client_context.h"
#include "grpcpp/create_channel.h"
#include "grpcpp/security/credentials.h"
#include "gtest/gtest.h"
#include "riskbound/v1/riskbound.grpc.pb.h"
#include "service/rpc/server.h"

namespace riskbound::testing {

// A server and a stub to it.
struct LoopbackEndpoint {
  std::unique_ptr<rpc::RunningServer> server;
  std::unique_ptr<v1::RiskBound::Stub> stub;
};

// StartLoopbackServer
// Starts a server on 127.0.0.1:0. On failure records a test failure and
// returns an endpoint with null members.
inline LoopbackEndpoint StartLoopbackServer() {
  LoopbackEndpoint e;
  rpc::ServerConfig config;
  config.listen_address = "127.0.0.1:0";
  config.plaintext = true;  // in-process, loopback only
  auto server = rpc::StartServer(config);
  EXPECT_TRUE(server.ok()) << server.status();
  if (!server.ok()) return e;
  e.server = std::move(*server);
  EXPECT_GT(e.server->port(), 0);
  e.stub = v1::RiskBound::NewStub(grpc::CreateChannel(
      "127.0.0.1:" + std::to_string(e.server->port()), grpc::InsecureChannelCredentials()));
  return e;
}

// CallContext
// A client context with a deadline, as every production call has.
inline std::unique_ptr<grpc::ClientContext> CallContext(
    std::chrono::seconds deadline = std::chrono::seconds(30)) {
  auto context = std::make_unique<grpc::ClientContext>();
  context->set_deadline(std::chrono::system_clock::now() + deadline);
  return context;
}

// LoopbackServerTest
// A fixture whose tests call stub_ on a fresh server.
class LoopbackServerTest : public ::testing::Test {
 protected:
  void SetUp() override {
    endpoint_ = StartLoopbackServer();
    ASSERT_NE(endpoint_.stub, nullptr);
    stub_ = endpoint_.stub.get();
  }

  LoopbackEndpoint endpoint_;
  v1::RiskBound::Stub* stub_ = nullptr;
};

}  // namespace riskbound::testing

#endif  // RISKBOUND_TESTS_TESTING_LOOPBACK_SERVER_H_
