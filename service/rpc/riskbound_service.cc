#include "service/rpc/riskbound_service.h"

#include <algorithm>
#include <optional>
#include <string>
#include <vector>

#include "absl/strings/match.h"
#include "absl/strings/str_cat.h"
#include "absl/strings/str_format.h"
#include "absl/time/clock.h"
#include "grpcpp/support/byte_buffer.h"
#include "grpcpp/support/slice.h"
#include "service/core/stop.h"
#include "service/rpc/handlers.h"
#include "service/rpc/logging.h"
#include "service/rpc/registry_convert.h"
#include "service/rpc/request_id.h"
#include "service/rpc/status.h"

namespace riskbound::rpc {
namespace internal {

// One call: its StopToken, fired by gRPC's OnCancel (client gone, deadline)
// or by the service's CancelAll (drain period over). Owned by gRPC from
// creation to OnDone, when it deletes itself.
class CallReactor final : public grpc::ServerUnaryReactor, public Cancellable {
 public:
  CallReactor(RiskBoundService* owner, absl::Time deadline) : owner_(owner), stop_(deadline) {
    owner_->Register(this);
  }
  void OnCancel() override { stop_.Cancel(); }
  void CancelCall() override { stop_.Cancel(); }
  void OnDone() override {
    owner_->Unregister(this);
    delete this;
  }
  core::StopToken& stop() { return stop_; }

 private:
  RiskBoundService* const owner_;
  core::StopToken stop_;
};

}  // namespace internal
namespace {

using internal::CallReactor;

// The caller's x-request-id metadata when usable, else a fresh one
// (request_id.h).
std::string RequestIdOf(const grpc::CallbackServerContext& context) {
  const auto& metadata = context.client_metadata();
  auto it = metadata.find(kRequestIdKey);
  if (it == metadata.end()) return RequestIdFor(absl::nullopt);
  return RequestIdFor(absl::string_view(it->second.data(), it->second.size()));
}

bool Decode(const grpc::ByteBuffer& bytes, google::protobuf::Message* out) {
  std::vector<grpc::Slice> slices;
  if (!bytes.Dump(&slices).ok()) return false;
  if (slices.size() == 1) {
    return out->ParseFromArray(slices[0].begin(), static_cast<int>(slices[0].size()));
  }
  std::string joined;
  joined.reserve(bytes.Length());
  for (const grpc::Slice& s : slices) {
    joined.append(reinterpret_cast<const char*>(s.begin()), s.size());
  }
  return out->ParseFromString(joined);
}

// What an answer said, for the metrics: gate verdicts, certificate families.
template <class Response>
void RecordAnswer(Metrics*, const Response&) {}
void RecordAnswer(Metrics* metrics, const v1::GateResponse& answer) {
  const std::string name = v1::Verdict_Name(answer.verdict());
  metrics->RecordVerdict(absl::StartsWith(name, "VERDICT_") ? name.substr(8) : name);
}
void RecordAnswer(Metrics* metrics, const v1::CertifyResponse& answer) {
  for (const v1::Certificate& c : answer.certificates()) metrics->RecordCertificate(c.family_name());
}

absl::Duration ToDuration(std::chrono::system_clock::time_point deadline) {
  const auto now = std::chrono::system_clock::now();
  if (deadline <= now) return absl::ZeroDuration();
  if (deadline - now > std::chrono::hours(24 * 365)) return absl::InfiniteDuration();
  return absl::FromChrono(deadline - now);
}

}  // namespace

RiskBoundService::RiskBoundService(CallPool* pool, CallLimits limits, Metrics* metrics,
                                   const TokenAuthenticator* auth)
    : pool_(pool), limits_(limits), metrics_(metrics), auth_(auth) {}

void RiskBoundService::Register(internal::Cancellable* call) {
  absl::MutexLock lock(&mu_);
  calls_.insert(call);
}

void RiskBoundService::Unregister(internal::Cancellable* call) {
  absl::MutexLock lock(&mu_);
  calls_.erase(call);
}

void RiskBoundService::StartDrain() { draining_.store(true); }

void RiskBoundService::CancelAll() {
  absl::MutexLock lock(&mu_);
  for (internal::Cancellable* call : calls_) call->CancelCall();
}

int RiskBoundService::calls_in_flight() const {
  absl::MutexLock lock(&mu_);
  return static_cast<int>(calls_.size());
}

bool RiskBoundService::Authenticated(const grpc::CallbackServerContext& context) const {
  if (auth_ == nullptr) return true;
  // One answer for a missing header, another scheme and a wrong token.
  const auto& metadata = context.client_metadata();
  const auto it = metadata.find("authorization");
  return it != metadata.end() &&
         auth_->Check(absl::string_view(it->second.data(), it->second.size()));
}

template <class Request, class Response>
grpc::ServerUnaryReactor* RiskBoundService::Dispatch(
    const char* method, grpc::CallbackServerContext* context, const grpc::ByteBuffer* request,
    grpc::ByteBuffer* response,
    absl::StatusOr<Response> (*handler)(const Request&, const CallInfo&)) {
  const absl::Time start = absl::Now();
  const absl::Duration budget =
      std::min(limits_.max_call_time, ToDuration(context->deadline()));
  auto* reactor = new CallReactor(this, start + budget);
  const std::string request_id = RequestIdOf(*context);
  context->AddInitialMetadata(kRequestIdKey, request_id);
  const std::int64_t request_bytes = static_cast<std::int64_t>(request->Length());

  // Finishes the call; the only place that does. REQUIRES: called once.
  auto finish = [this, method, context, reactor, request_id, start, request_bytes](
                    const absl::Status& status, std::int64_t response_bytes) {
    const absl::Duration latency = absl::Now() - start;
    if (metrics_ != nullptr) metrics_->RecordCall("grpc", method, status.code(), latency);
    if (CallLogging()) {  // the peer address is a new string each time: only when logged
      const std::string peer = context->peer();
      LogCall({.transport = "grpc",
               .rpc = method,
               .code = status.code(),
               .latency_us = absl::ToInt64Microseconds(latency),
               .peer = peer,
               .request_id = request_id,
               .message = status.message(),
               .request_bytes = request_bytes,
               .response_bytes = response_bytes});
    }
    reactor->Finish(ToGrpcStatus(status));
  };

  auto refused = [this](const char* reason) {
    if (metrics_ != nullptr) metrics_->RecordRefusal(reason);
  };
  if (!Authenticated(*context)) {
    refused("unauthenticated");
    finish(absl::UnauthenticatedError(kUnauthenticatedMessage), 0);
    return reactor;
  }
  if (draining_.load()) {
    finish(AdmissionRefusal(CallPool::Admission::kClosed), 0);
    return reactor;
  }
  auto work = [this, method, request, response, reactor, finish, handler, budget, refused,
               request_id]() {
    const core::StopToken& stop = reactor->stop();
    // The reason a stopped call gives, when the caller can still read it.
    auto stopped = [this, method, &stop, budget, &refused]() {
      if (draining_.load()) {
        return absl::UnavailableError(
            "the server is shutting down and stopped this call; retry on another replica");
      }
      absl::Status why = stop.Status();
      if (why.code() == absl::StatusCode::kDeadlineExceeded &&
          budget == limits_.max_call_time) {
        refused("deadline");
        return absl::DeadlineExceededError(absl::StrCat(
            method, " was stopped after the server's per-call limit of ",
            absl::FormatDuration(limits_.max_call_time), " (--max-call-seconds)"));
      }
      return why.ok() ? absl::CancelledError("the call was cancelled") : why;
    };
    if (stop.StopRequested()) return finish(stopped(), 0);
    Request decoded;
    if (!Decode(*request, &decoded)) {
      return finish(absl::InvalidArgumentError(absl::StrCat(
                        "the request could not be decoded as ", Request::descriptor()->full_name(),
                        ": the body is not a valid protobuf message of that type (or a "
                        "string field is not valid UTF-8)")),
                    0);
    }
    absl::StatusOr<Response> answer = handler(decoded, {.stop = stop, .request_id = request_id});
    if (stop.StopRequested() &&
        (answer.ok() || answer.status().code() == absl::StatusCode::kCancelled ||
         answer.status().code() == absl::StatusCode::kDeadlineExceeded)) {
      return finish(stopped(), 0);
    }
    if (!answer.ok()) return finish(answer.status(), 0);
    const std::int64_t size = static_cast<std::int64_t>(answer->ByteSizeLong());
    if (size > limits_.max_response_bytes) {
      refused("response_too_large");
      return finish(absl::ResourceExhaustedError(absl::StrCat(
                        "the answer would be ", size, " bytes, above the server's limit of ",
                        limits_.max_response_bytes,
                        " bytes (--max-response-bytes); send a smaller request, or raise the "
                        "limit on the server and the client's receive limit together")),
                    0);
    }
    if (metrics_ != nullptr) RecordAnswer(metrics_, *answer);
    std::string bytes;
    answer->SerializeToString(&bytes);
    grpc::Slice slice(std::move(bytes));
    *response = grpc::ByteBuffer(&slice, 1);
    finish(absl::OkStatus(), size);
  };
  const absl::Status refusal = AdmissionRefusal(pool_->TrySubmit(std::move(work)));
  if (!refusal.ok()) finish(refusal, 0);
  return reactor;
}

absl::Status RiskBoundService::AdmissionRefusal(CallPool::Admission admission) const {
  switch (admission) {
    case CallPool::Admission::kAdmitted:
      return absl::OkStatus();
    case CallPool::Admission::kFull:
      if (metrics_ != nullptr) metrics_->RecordRefusal("busy");
      return absl::ResourceExhaustedError(absl::StrCat(
          "the server is busy: ", pool_->max_pending(),
          " calls are already admitted (--max-pending-calls); retry with backoff"));
    case CallPool::Admission::kClosed:
      break;
  }
  if (metrics_ != nullptr) metrics_->RecordRefusal("draining");
  return absl::UnavailableError("the server is shutting down; retry on another replica");
}

grpc::ServerUnaryReactor* RiskBoundService::Certify(grpc::CallbackServerContext* context,
                                                    const grpc::ByteBuffer* request,
                                                    grpc::ByteBuffer* response) {
  return Dispatch("Certify", context, request, response, &HandleCertify);
}

grpc::ServerUnaryReactor* RiskBoundService::EstimateCapacity(
    grpc::CallbackServerContext* context, const grpc::ByteBuffer* request,
    grpc::ByteBuffer* response) {
  return Dispatch("EstimateCapacity", context, request, response, &HandleEstimateCapacity);
}

grpc::ServerUnaryReactor* RiskBoundService::Gate(grpc::CallbackServerContext* context,
                                                 const grpc::ByteBuffer* request,
                                                 grpc::ByteBuffer* response) {
  return Dispatch("Gate", context, request, response, &HandleGate);
}

grpc::ServerUnaryReactor* RiskBoundService::SelectStructure(
    grpc::CallbackServerContext* context, const grpc::ByteBuffer* request,
    grpc::ByteBuffer* response) {
  return Dispatch("SelectStructure", context, request, response, &HandleSelectStructure);
}

grpc::ServerUnaryReactor* RiskBoundService::PlanSamples(grpc::CallbackServerContext* context,
                                                        const grpc::ByteBuffer* request,
                                                        grpc::ByteBuffer* response) {
  return Dispatch("PlanSamples", context, request, response, &HandlePlanSamples);
}

grpc::ServerUnaryReactor* RiskBoundService::ListFamilies(grpc::CallbackServerContext* context,
                                                         const grpc::ByteBuffer* request,
                                                         grpc::ByteBuffer* response) {
  return Dispatch("ListFamilies", context, request, response, &HandleListFamilies);
}

grpc::ServerUnaryReactor* RiskBoundService::FitEffectiveVcDimension(
    grpc::CallbackServerContext* context, const grpc::ByteBuffer* request,
    grpc::ByteBuffer* response) {
  return Dispatch("FitEffectiveVcDimension", context, request, response,
                  &HandleFitEffectiveVcDimension);
}

// ---------------------------------------------------------------------------
// ScoreRegistry: one reactor per stream.

namespace internal {

// One registry stream. Its life: admitted (a pool reservation) -> read the
// settings -> for each record: read, score on a pool thread, write -> after
// the client's half-close, the summary and OK. Exactly one read or one
// write, or one pool task, is outstanding at any time, so the stream holds
// one request and one answer at most. Owned by gRPC from creation to
// OnDone, when it deletes itself.
class ScoreStream final : public grpc::ServerBidiReactor<grpc::ByteBuffer, grpc::ByteBuffer>,
                          public Cancellable {
 public:
  ScoreStream(RiskBoundService* owner, grpc::CallbackServerContext* context)
      : owner_(owner),
        start_(absl::Now()),
        stream_deadline_(start_ + ToDuration(context->deadline())),
        peer_(context->peer()),
        request_id_(RequestIdOf(*context)) {
    context->AddInitialMetadata(kRequestIdKey, request_id_);
    owner_->Register(this);
  }

  // Admission; called once, right after construction, with whether the
  // stream carries a valid bearer token (always true without tokens).
  void Begin(bool authenticated) {
    if (!authenticated) {
      Refused("unauthenticated");
      return FinishOnce(absl::UnauthenticatedError(kUnauthenticatedMessage));
    }
    const absl::Status refusal = owner_->AdmissionRefusal(
        owner_->draining_.load() ? CallPool::Admission::kClosed : owner_->pool_->TryReserve());
    if (!refusal.ok()) return FinishOnce(refusal);
    reserved_ = true;
    StartRead(&in_);
  }

  void OnReadDone(bool ok) override {
    if (ok) request_bytes_ += static_cast<std::int64_t>(in_.Length());
    owner_->pool_->SubmitReserved([this, ok] { ok ? Process() : Close(); });
  }

  void OnWriteDone(bool ok) override {
    if (!ok) return FinishOnce(absl::CancelledError("the stream broke while writing an answer"));
    if (closing_) return;
    StartRead(&in_);
  }

  void OnCancel() override { CancelCall(); }

  void CancelCall() override {
    absl::MutexLock lock(&mu_);
    cancelled_ = true;
    if (record_stop_ != nullptr) record_stop_->Cancel();
  }

  void OnDone() override {
    if (reserved_) owner_->pool_->Release();
    const absl::Duration latency = absl::Now() - start_;
    if (owner_->metrics_ != nullptr) {
      owner_->metrics_->RecordCall("grpc", "ScoreRegistry", final_.code(), latency);
    }
    LogCall({.transport = "grpc",
             .rpc = "ScoreRegistry",
             .code = final_.code(),
             .latency_us = absl::ToInt64Microseconds(latency),
             .peer = peer_,
             .request_id = request_id_,
             .message = final_.ok() ? absl::StrCat(tally_.record_count, " records, ",
                                                   tally_.error_count, " record errors")
                                    : std::string(final_.message()),
             .request_bytes = request_bytes_,
             .response_bytes = response_bytes_});
    owner_->Unregister(this);
    delete this;
  }

 private:
  bool Cancelled() {
    absl::MutexLock lock(&mu_);
    return cancelled_;
  }

  absl::Status Stopped() const {
    if (owner_->draining_.load()) {
      return absl::UnavailableError(
          "the server is shutting down and stopped this stream; resume on another replica");
    }
    if (absl::Now() >= stream_deadline_) {
      return absl::DeadlineExceededError("the stream ran past its deadline");
    }
    return absl::CancelledError("the stream was cancelled");
  }

  void Refused(const char* reason) {
    if (owner_->metrics_ != nullptr) owner_->metrics_->RecordRefusal(reason);
  }

  // Ends the stream with `status`; the only place that calls Finish.
  void FinishOnce(const absl::Status& status) {
    if (finished_) return;
    finished_ = true;
    final_ = status;
    Finish(ToGrpcStatus(status));
  }

  // On a pool thread: the message just read.
  void Process() {
    if (Cancelled()) return FinishOnce(Stopped());
    v1::ScoreRegistryRequest item;
    const bool decoded = Decode(in_, &item);
    in_.Clear();
    if (!settings_.has_value()) {
      if (!decoded || !item.has_settings()) {
        return FinishOnce(core::InvalidFields(
            {{"settings", "the stream's first message must carry the run's settings "
                          "(ScoreRegistryRequest.settings)"}}));
      }
      absl::StatusOr<core::RegistrySettings> settings = ValidatedSettings(item.settings());
      if (!settings.ok()) return FinishOnce(settings.status());
      wire_settings_ = item.settings();
      settings_ = std::move(*settings);
      ledger_.emplace(*settings_);
      StartRead(&in_);
      return;
    }
    if (decoded && item.has_record() && item.record().ledger_only()) {
      const absl::Status counted = CountLedgerOnly(item.record(), &*ledger_);
      if (!counted.ok()) return FinishOnce(counted);
      ++tally_.ledger_only_record_count;
      StartRead(&in_);
      return;
    }
    const std::uint64_t index = next_index_++;
    v1::ScoreRegistryResponse response;
    v1::RecordResult* result = response.mutable_result();
    if (!decoded) {
      *result = ItemErrorResult(index, "record",
                                "the message could not be decoded as "
                                "riskbound.v1.ScoreRegistryRequest (or a string field is not "
                                "valid UTF-8)");
    } else if (item.has_settings()) {
      *result = ItemErrorResult(index, "settings",
                                "settings come once, as the stream's first message");
    } else if (!item.has_record()) {
      *result = ItemErrorResult(index, "record", "the message holds no record");
    } else {
      core::StopToken stop(std::min(stream_deadline_, absl::Now() + owner_->limits_.max_call_time));
      {
        absl::MutexLock lock(&mu_);
        if (cancelled_) stop.Cancel();
        record_stop_ = &stop;
      }
      *result = ScoreRecord(wire_settings_, item.record(), index,
                            owner_->limits_.max_response_bytes, &*ledger_,
                            {.stop = stop, .request_id = request_id_});
      {
        absl::MutexLock lock(&mu_);
        record_stop_ = nullptr;
      }
      if (Cancelled()) return FinishOnce(Stopped());
      if (owner_->metrics_ != nullptr) {
        if (result->has_gated()) RecordAnswer(owner_->metrics_, result->gated());
        if (result->has_certified()) RecordAnswer(owner_->metrics_, result->certified());
      }
    }
    tally_.Add(*result);
    Write(response);
  }

  // On a pool thread: the client closed its half (or the stream broke).
  void Close() {
    if (Cancelled()) return FinishOnce(Stopped());
    if (!settings_.has_value()) {
      return FinishOnce(core::InvalidFields(
          {{"settings", "the stream ended before its settings (ScoreRegistryRequest.settings)"}}));
    }
    v1::ScoreRegistryResponse response;
    *response.mutable_summary() = RunSummaryOf(wire_settings_, *settings_, *ledger_, tally_);
    closing_ = true;
    finished_ = true;
    final_ = absl::OkStatus();
    Encode(response);
    StartWriteAndFinish(&out_, grpc::WriteOptions(), grpc::Status::OK);
  }

  void Encode(const v1::ScoreRegistryResponse& response) {
    std::string bytes;
    response.SerializeToString(&bytes);
    response_bytes_ += static_cast<std::int64_t>(bytes.size());
    grpc::Slice slice(std::move(bytes));
    out_ = grpc::ByteBuffer(&slice, 1);
  }

  void Write(const v1::ScoreRegistryResponse& response) {
    Encode(response);
    StartWrite(&out_);
  }

  RiskBoundService* const owner_;
  const absl::Time start_;
  const absl::Time stream_deadline_;
  const std::string peer_;
  const std::string request_id_;

  // Touched by one callback or pool task at a time (they never overlap).
  grpc::ByteBuffer in_;
  grpc::ByteBuffer out_;
  bool reserved_ = false;
  bool finished_ = false;
  bool closing_ = false;
  absl::Status final_;
  std::optional<core::RegistrySettings> settings_;
  v1::ScoreSettings wire_settings_;
  std::optional<core::RegistryLedger> ledger_;
  RegistryTally tally_;
  std::uint64_t next_index_ = 0;
  std::int64_t request_bytes_ = 0;
  std::int64_t response_bytes_ = 0;

  absl::Mutex mu_;
  bool cancelled_ ABSL_GUARDED_BY(mu_) = false;
  core::StopToken* record_stop_ ABSL_GUARDED_BY(mu_) = nullptr;
};

}  // namespace internal

grpc::ServerBidiReactor<grpc::ByteBuffer, grpc::ByteBuffer>* RiskBoundService::ScoreRegistry(
    grpc::CallbackServerContext* context) {
  auto* stream = new internal::ScoreStream(this, context);
  stream->Begin(Authenticated(*context));
  return stream;
}

}  // namespace riskbound::rpc
