// Benchmarks of Certify. Each figure that matters is a ratio against a
// baseline measured in the same run:
// - BM_CoreCertify/<choice>: counter x_recommended = time / time of the
//   recommended single family, measured just before.
// - BM_HandleCertify/<choice>: the service's own work per call without the
//   transport (decode the request bytes, copy to the core, Certify, copy the
//   answer back, encode it); counter x_core = time / the core's Certify
//   alone on the same request, measured just before.
// - BM_CoreVsScipy/<choice>: per-record cost of the core's hold-out
//   certificate (recommended family, or every applicable family) on 2 000
//   records against scipy's vectorised betaincinv computing the two
//   Clopper-Pearson limits of the same records (upper betaincinv(k+1, n-k,
//   1-delta), lower betaincinv(k, n-k+1, delta)) through /usr/bin/python3 in
//   the same run, both in CPU time; counter x_scipy = core per record /
//   scipy per record.
// - BM_RpcCertify: counter x_health_check = Certify round trip / gRPC health
//   check round trip on the same loopback server and channel.
#include <time.h>
#include <unistd.h>

#include <algorithm>
#include <chrono>
#include <cmath>
#include <cstdio>
#include <fstream>
#include <future>
#include <memory>
#include <random>
#include <string>
#include <vector>

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

// The records of BM_CoreVsScipy: n log-uniform in [100, 10^6], error rate
// uniform in [0.001, 0.3], 1 <= k <= n - 1 (both limits defined), delta 0.05.
std::vector<riskbound::core::SampleCounts> ScipyRecords() {
  std::mt19937_64 bits(20261202);
  std::uniform_real_distribution<double> log_n(std::log(100.0), std::log(1e6));
  std::uniform_real_distribution<double> rate(0.001, 0.3);
  std::vector<riskbound::core::SampleCounts> records;
  for (int i = 0; i < 2000; ++i) {
    const auto n = static_cast<std::uint64_t>(std::exp(log_n(bits)));
    auto k = static_cast<std::uint64_t>(std::llround(rate(bits) * static_cast<double>(n)));
    k = std::min(std::max<std::uint64_t>(k, 1), n - 1);
    records.push_back({k, n});
  }
  return records;
}

// Prints scipy's CPU seconds per record for both limits of the records in
// the file argv[1] ("k n" lines), best of 5 runs of the vectorised calls.
constexpr char kScipyScript[] =
    "import sys, time, numpy as np\n"
    "from scipy.special import betaincinv\n"
    "k, n = np.loadtxt(sys.argv[1], dtype=np.float64, unpack=True)\n"
    "d = 0.05\n"
    "best = 1e9\n"
    "for _ in range(5):\n"
    "    t = time.process_time()\n"
    "    up = betaincinv(k + 1, n - k, 1 - d)\n"
    "    lo = betaincinv(k, n - k + 1, d)\n"
    "    best = min(best, time.process_time() - t)\n"
    "assert np.all(np.isfinite(up)) and np.all(np.isfinite(lo))\n"
    "print(best / len(k))\n";

// scipy's CPU seconds per record for both limits of `records` (best of 5
// runs of the two vectorised calls), or a negative value when scipy cannot
// be run.
double ScipySecondsPerRecord(const std::vector<riskbound::core::SampleCounts>& records) {
  char path[] = "/tmp/riskbound-scipy-records-XXXXXX";
  const int fd = mkstemp(path);
  if (fd < 0) return -1;
  close(fd);
  {
    std::ofstream out(path);
    for (const auto& r : records) out << r.error_count << " " << r.sample_count << "\n";
  }
  const std::string command = std::string("/usr/bin/python3 -c '") + kScipyScript + "' " + path;
  FILE* pipe = popen(command.c_str(), "r");
  double seconds = -1;
  if (pipe != nullptr) {
    if (std::fscanf(pipe, "%lf", &seconds) != 1) seconds = -1;
    if (pclose(pipe) != 0) seconds = -1;
  }
  std::remove(path);
  return seconds;
}

void BM_CoreVsScipy(benchmark::State& state) {
  const auto choice = static_cast<FamilyChoice>(state.range(0));
  const std::vector<riskbound::core::SampleCounts> records = ScipyRecords();
  const double scipy = ScipySecondsPerRecord(records);
  if (scipy <= 0) {
    state.SkipWithError("scipy (/usr/bin/python3) could not be run");
    return;
  }
  std::vector<CertifyRequest> requests(records.size());
  for (std::size_t i = 0; i < records.size(); ++i) {
    requests[i].evidence.holdout = records[i];
    requests[i].family_choice = choice;
  }
  // CPU time of this thread, as scipy's process_time (the machine may be shared).
  auto cpu_seconds = [] {
    timespec t{};
    clock_gettime(CLOCK_THREAD_CPUTIME_ID, &t);
    return static_cast<double>(t.tv_sec) + 1e-9 * static_cast<double>(t.tv_nsec);
  };
  const double start = cpu_seconds();
  for (auto _ : state) {
    for (const CertifyRequest& r : requests) benchmark::DoNotOptimize(riskbound::core::Certify(r));
  }
  const double per =
      (cpu_seconds() - start) / static_cast<double>(state.iterations() * requests.size());
  state.counters["core_us_per_record"] = per * 1e6;
  state.counters["scipy_us_per_record"] = scipy * 1e6;
  state.counters["x_scipy"] = per / scipy;
}
BENCHMARK(BM_CoreVsScipy)
    ->Arg(static_cast<int>(FamilyChoice::kRecommended))
    ->Arg(static_cast<int>(FamilyChoice::kAllApplicable))
    ->Unit(benchmark::kMillisecond);

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
