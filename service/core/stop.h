// StopToken: how a caller tells a long computation to stop.
//
// The core never knows about RPCs. A caller that can be cancelled (an RPC
// whose client gave up, a server that is draining, a per-call time budget)
// hands the core a StopToken; every loop in the core that can run long calls
// StopRequested() every so often and, when it returns true, stops and lets
// its top-level entry point return Status() (CANCELLED or
// DEADLINE_EXCEEDED) instead of an answer. A stopped computation never
// returns a partial answer as if it were complete.
#ifndef RISKBOUND_SERVICE_CORE_STOP_H_
#define RISKBOUND_SERVICE_CORE_STOP_H_

#include <atomic>

#include "absl/status/status.h"
#include "absl/time/clock.h"
#include "absl/time/time.h"

namespace riskbound::core {

class StopToken {
 public:
  // A token that stops only when Cancel() is called.
  StopToken() = default;
  // A token that also stops once `deadline` has passed.
  explicit StopToken(absl::Time deadline) : deadline_(deadline) {}
  StopToken(const StopToken&) = delete;
  StopToken& operator=(const StopToken&) = delete;

  // Never
  // A shared token that never stops: the default for callers (tests, the
  // benchmark) that need no cancellation. Thread-safe.
  static const StopToken& Never() {
    static const StopToken* const never = new StopToken();
    return *never;
  }

  // Cancel
  // Makes StopRequested() true from now on. Thread-safe; idempotent.
  void Cancel() { cancelled_.store(true, std::memory_order_relaxed); }

  // StopRequested
  // True once Cancel() was called or the deadline has passed. Thread-safe.
  // Costs an atomic load, plus a clock read when a deadline is set (tens of
  // nanoseconds): call it every few thousand cheap iterations, or once per
  // expensive one.
  bool StopRequested() const {
    if (cancelled_.load(std::memory_order_relaxed)) return true;
    return deadline_ != absl::InfiniteFuture() && absl::Now() >= deadline_;
  }

  // Status
  // OK while not stopped; CANCELLED after Cancel(); DEADLINE_EXCEEDED once
  // the deadline has passed (when both hold, CANCELLED). Thread-safe.
  absl::Status Status() const {
    if (cancelled_.load(std::memory_order_relaxed)) {
      return absl::CancelledError("the computation was cancelled before it finished");
    }
    if (deadline_ != absl::InfiniteFuture() && absl::Now() >= deadline_) {
      return absl::DeadlineExceededError("the computation ran past its deadline and was stopped");
    }
    return absl::OkStatus();
  }

  absl::Time deadline() const { return deadline_; }

 private:
  std::atomic<bool> cancelled_{false};
  // Constant after construction.
  const absl::Time deadline_ = absl::InfiniteFuture();
};

}  // namespace riskbound::core

#endif  // RISKBOUND_SERVICE_CORE_STOP_H_
