// registry_core_bench: the in-process baseline of bench/registry_bench.py.
// Reads a registry export (JSON lines, one riskbound.v1.RegistryRecord per
// line; reading is not timed), then scores every record in this process
// exactly as one ScoreRegistry stream does (ScoreRecord: the copy to the core,
// the core's Certify or gate, the copy back) and prints records per second.
//
// usage: registry_core_bench FILE.jsonl [--gate-max-risk E]
#include <chrono>
#include <cstdio>
#include <fstream>
#include <iostream>
#include <string>
#include <vector>

#include "google/protobuf/util/json_util.h"
#include "riskbound/v1/registry.pb.h"
#include "service/core/registry.h"
#include "service/core/stop.h"
#include "service/rpc/handlers.h"
#include "service/rpc/registry_convert.h"

int main(int argc, char** argv) {
  using riskbound::v1::RegistryRecord;
  if (argc < 2) {
    std::cerr << "usage: registry_core_bench FILE.jsonl [--gate-max-risk E]\n";
    return 2;
  }
  riskbound::v1::ScoreSettings settings;
  if (argc == 4 && std::string(argv[2]) == "--gate-max-risk") {
    settings.mutable_gate()->set_max_risk(std::stod(argv[3]));
    settings.mutable_gate()->set_failure_probability(0.05);
  } else {
    settings.mutable_certify()->set_failure_probability(0.05);
  }
  std::ifstream in(argv[1]);
  std::vector<RegistryRecord> records;
  std::string line;
  while (std::getline(in, line)) {
    RegistryRecord r;
    if (!google::protobuf::util::JsonStringToMessage(line, &r).ok()) continue;
    records.push_back(std::move(r));
  }
  auto core = riskbound::rpc::ValidatedSettings(settings);
  if (!core.ok()) {
    std::cerr << core.status() << "\n";
    return 1;
  }
  riskbound::core::RegistryLedger ledger(*core);
  const auto start = std::chrono::steady_clock::now();
  std::uint64_t ok = 0;
  for (std::size_t i = 0; i < records.size(); ++i) {
    const riskbound::v1::RecordResult result = riskbound::rpc::ScoreRecord(
        settings, records[i], i, 4 << 20, &ledger,
        riskbound::rpc::CallInfo{riskbound::core::StopToken::Never(), "bench"});
    ok += result.has_error() ? 0 : 1;
  }
  const double seconds =
      std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count();
  std::printf("{\"records\": %zu, \"scored\": %llu, \"seconds\": %.3f, \"records_per_second\": %.0f}\n",
              records.size(), static_cast<unsigned long long>(ok), seconds,
              records.size() / seconds);
  return 0;
}
