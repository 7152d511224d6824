// Fuzz target: every RPC's request decoded from fuzz bytes, then the
// handler (copy to the core, the core's validation and math, copy back),
// exactly as the server runs it. The first byte picks the method; the rest
// is the request's protobuf encoding. A finding is a crash, a sanitizer
// report, or an OK answer holding a NaN or a certificate bound outside
// [0, 1] (of the error-rate families). Built with libFuzzer by scripts/fuzz;
// the same entry point replays the seed corpus and every regression in
// ctest (replay_main.cc).
#include <cmath>
#include <cstdint>
#include <cstdlib>
#include <cstdio>

#include "absl/time/clock.h"
#include "google/protobuf/descriptor.h"
#include "google/protobuf/message.h"
#include "riskbound/v1/registry.pb.h"
#include "service/core/registry.h"
#include "service/core/stop.h"
#include "service/rpc/handlers.h"
#include "service/rpc/registry_convert.h"

namespace {

using google::protobuf::FieldDescriptor;
using google::protobuf::Message;

[[noreturn]] void Finding(const char* what, const Message& m) {
  std::fprintf(stderr, "finding: %s in %s:\n%s\n", what, m.GetDescriptor()->full_name().c_str(),
               m.DebugString().c_str());
  std::abort();
}

// No NaN anywhere in an answer; certificates of error-rate families within
// [0, 1] with lower <= upper.
void CheckAnswer(const Message& m) {
  const auto* d = m.GetDescriptor();
  const auto* r = m.GetReflection();
  for (int i = 0; i < d->field_count(); ++i) {
    const FieldDescriptor* f = d->field(i);
    if (f->cpp_type() == FieldDescriptor::CPPTYPE_DOUBLE) {
      if (f->is_repeated()) {
        for (int j = 0; j < r->FieldSize(m, f); ++j) {
          if (std::isnan(r->GetRepeatedDouble(m, f, j))) Finding("NaN", m);
        }
      } else if (std::isnan(r->GetDouble(m, f))) {
        Finding("NaN", m);
      }
    } else if (f->cpp_type() == FieldDescriptor::CPPTYPE_MESSAGE) {
      if (f->is_repeated()) {
        for (int j = 0; j < r->FieldSize(m, f); ++j) CheckAnswer(r->GetRepeatedMessage(m, f, j));
      } else if (r->HasField(m, f)) {
        CheckAnswer(r->GetMessage(m, f));
      }
    }
  }
  if (d->full_name() == "riskbound.v1.Certificate") {
    const auto& c = static_cast<const riskbound::v1::Certificate&>(m);
    if (!c.has_loss_range()) {
      if (!(c.risk_upper_bound() >= 0.0 && c.risk_upper_bound() <= 1.0)) {
        Finding("upper bound outside [0, 1]", m);
      }
      if (c.has_risk_lower_bound() &&
          !(c.risk_lower_bound() >= 0.0 && c.risk_lower_bound() <= c.risk_upper_bound())) {
        Finding("lower bound outside [0, upper]", m);
      }
    }
  }
}

template <class Request, class Response>
void Run(const uint8_t* data, size_t size,
         absl::StatusOr<Response> (*handler)(const Request&, const riskbound::rpc::CallInfo&)) {
  Request request;
  if (!request.ParseFromArray(data, static_cast<int>(size))) return;
  // The server's per-call limit, shortened: a slow input shows as a timeout
  // of the fuzzer, never as a partial answer.
  riskbound::core::StopToken stop(absl::Now() + absl::Seconds(2));
  absl::StatusOr<Response> answer = handler(request, riskbound::rpc::CallInfo{stop, "fuzz"});
  if (answer.ok()) CheckAnswer(*answer);
}

void RunRecord(const uint8_t* data, size_t size, bool gate) {
  riskbound::v1::ScoreRegistryRequest item;
  if (!item.ParseFromArray(data, static_cast<int>(size))) return;
  riskbound::core::StopToken stop(absl::Now() + absl::Seconds(2));
  if (item.has_settings()) {
    (void)riskbound::rpc::ValidatedSettings(item.settings());
    return;
  }
  riskbound::v1::ScoreSettings settings;
  if (gate) {
    settings.mutable_gate()->set_max_risk(0.05);
    settings.mutable_gate()->set_failure_probability(0.05);
  } else {
    settings.mutable_certify()->set_failure_probability(0.05);
    settings.set_delta_sharing(riskbound::v1::DELTA_SHARING_PER_HOLDOUT_SET);
    auto* set = settings.add_holdout_sets();
    set->set_holdout_set_id("s");
    set->set_record_count(3);
  }
  auto core = riskbound::rpc::ValidatedSettings(settings);
  if (!core.ok()) std::abort();
  riskbound::core::RegistryLedger ledger(*core);
  for (int i = 0; i < 4; ++i) {
    const riskbound::v1::RecordResult result = riskbound::rpc::ScoreRecord(
        settings, item.record(), i, 4 << 20, &ledger, riskbound::rpc::CallInfo{stop, "fuzz"});
    CheckAnswer(result);
  }
}

}  // namespace

extern "C" int LLVMFuzzerTestOneInput(const uint8_t* data, size_t size) {
  if (size < 1) return 0;
  const uint8_t method = data[0] % 9;
  ++data;
  --size;
  using namespace riskbound;
  switch (method) {
    case 0: Run<v1::CertifyRequest, v1::CertifyResponse>(data, size, &rpc::HandleCertify); break;
    case 1:
      Run<v1::EstimateCapacityRequest, v1::EstimateCapacityResponse>(data, size,
                                                                      &rpc::HandleEstimateCapacity);
      break;
    case 2: Run<v1::GateRequest, v1::GateResponse>(data, size, &rpc::HandleGate); break;
    case 3:
      Run<v1::SelectStructureRequest, v1::SelectStructureResponse>(data, size,
                                                                    &rpc::HandleSelectStructure);
      break;
    case 4:
      Run<v1::PlanSamplesRequest, v1::PlanSamplesResponse>(data, size, &rpc::HandlePlanSamples);
      break;
    case 5:
      Run<v1::ListFamiliesRequest, v1::ListFamiliesResponse>(data, size, &rpc::HandleListFamilies);
      break;
    case 6: RunRecord(data, size, false); break;
    case 7: RunRecord(data, size, true); break;
    case 8:
      Run<v1::FitEffectiveVcDimensionRequest, v1::FitEffectiveVcDimensionResponse>(
          data, size, &rpc::HandleFitEffectiveVcDimension);
      break;
  }
  return 0;
}
