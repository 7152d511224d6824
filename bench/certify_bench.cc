// Benchmarks of Certify. Each figure that matters is a ratio against a
// baseline measured in the same run:
// - BM_CoreCertify/<choice>: counter x_recommended = time / time of the
//   recommended single family, measured just before.
// - BM_HandleCertify/<choice>: the service's own work per call without the
//   transport (decode the request bytes, copy to the core, Certify, copy the
//   answer back, encode it); counter x_core = time / the core's Certify
//   alone on the same request, measured just before.
// - BM_RpcCertify: counter x_health_check = Certify round trip / gRPC health
//   check round trip on the same loopback server and channel.
#include <chrono>
#include <future>
#include <memory>
#include <string>

#include "benchmark/benchmark.h"
#include "grpcpp/create_channel.h"
#include "grpcpp/generic/generic_stub.h"
#include "grpcpp/security/credentials.h"
#include "riskbound/v1/riskbound.grpc.pb.h"
#include "service/core/certify.h"
#include "service/core/stop.h"
#include "service/rpc/handlers.h"
#include "service/rpc/server.h"

namespace {

using riskbound::core::CertifyRequest;
using riskbound::core::FamilyChoice;

CertifyRequest MakeRequest(FamilyChoice choice) {
  CertifyRequest req;
  req.evidence.holdout = riskbound::core::SampleCounts{212, 5000};
  riskbound::core::TrainingEvidence t;
  t.error_count = 270;
  t.sample_count = 9000;
  t.capacity.vc_dimension = 41;
  t.capacity.log_hypothesis_count = 13.86;
  req.evidence.training = t;
  req.family_choice = choice;
  return req;
}

// Seconds per call of fn, measured over `n` calls.
template <typename Fn>
double SecondsPerCall(int n, Fn fn) {
  const auto start = std::chrono::steady_clock::now();
  for (int i = 0; i < n; ++i) fn();
  return std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count() / n;
}

void BM_CoreCertify(benchmark::State& state) {
  const auto choice = static_cast<FamilyChoice>(state.range(0));
  const CertifyRequest baseline = MakeRequest(FamilyChoice::kRecommended);
  const double base =
      SecondsPerCall(2000, [&] { benchmark::DoNotOptimize(riskbound::core::Certify(baseline)); });
  const CertifyRequest req = MakeRequest(choice);
  const auto start = std::chrono::steady_clock::now();
  for (auto _ : state) benchmark::DoNotOptimize(riskbound::core::Certify(req));
  const double per =
      std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count() /
      static_cast<double>(state.iterations());
  state.counters["x_recommended"] = per / base;
}
BENCHMARK(BM_CoreCertify)
    ->Arg(static_cast<int>(FamilyChoice::kRecommended))
    ->Arg(static_cast<int>(FamilyChoice::kAllApplicable));

void BM_HandleCertify(benchmark::State& state) {
  const auto choice = static_cast<FamilyChoice>(state.range(0));
  const CertifyRequest core_request = MakeRequest(choice);
  const double base = SecondsPerCall(
      2000, [&] { benchmark::DoNotOptimize(riskbound::core::Certify(core_request)); });
  riskbound::v1::CertifyRequest wire;
  wire.mutable_evidence()->mutable_holdout()->set_error_count(212);
  wire.mutable_evidence()->mutable_holdout()->set_sample_count(5000);
  auto* training = wire.mutable_evidence()->mutable_training();
  training->set_error_count(270);
  training->set_sample_count(9000);
  training->mutable_capacity()->set_vc_dimension(41);
  training->mutable_capacity()->set_log_hypothesis_count(13.86);
  wire.set_failure_probability(0.05);
  if (choice == FamilyChoice::kAllApplicable) wire.mutable_all_applicable();
  const std::string bytes = wire.SerializeAsString();
  const riskbound::core::StopToken stop;
  const auto start = std::chrono::steady_clock::now();
  for (auto _ : state) {
    riskbound::v1::CertifyRequest decoded;
    decoded.ParseFromString(bytes);
    auto answer = riskbound::rpc::HandleCertify(decoded, {.stop = stop, .request_id = "bench"});
    std::string out;
    if (answer.ok()) answer->SerializeToString(&out);
    benchmark::DoNotOptimize(out);
  }
  const double per =
      std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count() /
      static_cast<double>(state.iterations());
  state.counters["x_core"] = per / base;
}
BENCHMARK(BM_HandleCertify)
    ->Arg(static_cast<int>(FamilyChoice::kRecommended))
    ->Arg(static_cast<int>(FamilyChoice::kAllApplicable));

void BM_RpcCertify(benchmark::State& state) {
  riskbound::rpc::ServerConfig config;
  config.listen_address = "127.0.0.1:0";
  config.plaintext = true;  // loopback
  auto server = riskbound::rpc::StartServer(config);
  if (!server.ok()) {
    state.SkipWithError("server did not start");
    return;
  }
  auto channel = grpc::CreateChannel("127.0.0.1:" + std::to_string((*server)->port()),
                                     grpc::InsecureChannelCredentials());
  auto stub = riskbound::v1::RiskBound::NewStub(channel);
  grpc::GenericStub generic(channel);
  auto health_check = [&] {
    grpc::ClientContext ctx;
    grpc::Slice empty("");  // HealthCheckRequest{service: ""} serializes to no bytes
    grpc::ByteBuffer request(&empty, 1);
    grpc::ByteBuffer response;
    std::promise<grpc::Status> done;
    generic.UnaryCall(&ctx, "/grpc.health.v1.Health/Check", grpc::StubOptions(), &request,
                      &response, [&](grpc::Status s) { done.set_value(s); });
    return done.get_future().get();
  };
  riskbound::v1::CertifyRequest req;
  req.mutable_evidence()->mutable_holdout()->set_error_count(212);
  req.mutable_evidence()->mutable_holdout()->set_sample_count(5000);
  req.set_failure_probability(0.05);
  req.mutable_all_applicable();
  auto certify = [&] {
    grpc::ClientContext ctx;
    riskbound::v1::CertifyResponse resp;
    return stub->Certify(&ctx, req, &resp);
  };
  if (!health_check().ok() || !certify().ok()) {
    state.SkipWithError("warm-up call failed");
    return;
  }
  const double base = SecondsPerCall(500, health_check);
  const auto start = std::chrono::steady_clock::now();
  for (auto _ : state) benchmark::DoNotOptimize(certify());
  const double per =
      std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count() /
      static_cast<double>(state.iterations());
  state.counters["x_health_check"] = per / base;
}
BENCHMARK(BM_RpcCertify)->UseRealTime();

}  // namespace

BENCHMARK_MAIN();
