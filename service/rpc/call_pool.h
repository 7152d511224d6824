// CallPool: the threads that compute answers, and the admission limit in
// front of them.
//
// gRPC's callback API hands every call to the service without a thread of
// its own; the service submits the work here. At most `threads` calls compute
// at once; at most `max_pending` calls are admitted at once (computing plus
// waiting for a thread). A call beyond that is refused at once, so a burst of
// expensive requests can occupy at most `threads` cores and a bounded queue,
// never one thread per call in flight.
#ifndef RISKBOUND_SERVICE_RPC_CALL_POOL_H_
#define RISKBOUND_SERVICE_RPC_CALL_POOL_H_

#include <cstddef>
#include <deque>
#include <functional>
#include <thread>
#include <vector>

#include "absl/base/thread_annotations.h"
#include "absl/synchronization/mutex.h"

namespace riskbound::rpc {

class CallPool {
 public:
  // REQUIRES: threads >= 1, max_pending >= threads.
  CallPool(int threads, int max_pending);
  // Joins the threads after the queue has run dry (StopAdmitting first).
  ~CallPool();
  CallPool(const CallPool&) = delete;
  CallPool& operator=(const CallPool&) = delete;

  enum class Admission { kAdmitted, kFull, kClosed };

  // TrySubmit
  // Queues `work` for a thread and returns kAdmitted, or returns kFull when
  // max_pending calls are already admitted, or kClosed after StopAdmitting.
  // `work` is not run unless admitted. Thread-safe.
  Admission TrySubmit(std::function<void()> work);

  // TryReserve
  // Admits a long-lived call (a stream) as one pending call with no work
  // yet: kAdmitted, kFull or kClosed as TrySubmit. An admitted call queues
  // its work with SubmitReserved and ends with Release. Thread-safe.
  Admission TryReserve();

  // SubmitReserved
  // Queues `work` for a thread on behalf of a call that holds a
  // reservation; never refused (the reservation was the admission), and the
  // work runs in the same first-come order as every other call's.
  // REQUIRES: a reservation held and not yet released. Thread-safe.
  void SubmitReserved(std::function<void()> work);

  // Release
  // Ends a reservation. REQUIRES: none of its work is still queued or
  // running. Thread-safe.
  void Release();

  // StopAdmitting
  // From now on TrySubmit returns kClosed; admitted work still runs.
  // Thread-safe; idempotent.
  void StopAdmitting();

  // WaitIdle
  // Blocks until no admitted work remains or `timeout` passes; returns true
  // when idle. Thread-safe.
  bool WaitIdle(absl::Duration timeout);

  // The number of calls admitted (reservations included) and not yet
  // finished. Thread-safe.
  int pending() const;

  int threads() const { return static_cast<int>(threads_.size()); }
  int max_pending() const { return max_pending_; }

 private:
  void Run();

  // Constant after construction.
  const int max_pending_;
  std::vector<std::thread> threads_;

  mutable absl::Mutex mu_;
  struct Queued {
    std::function<void()> work;
    // True for TrySubmit's work, whose end ends its admission.
    bool ends_admission;
  };
  std::deque<Queued> queue_ ABSL_GUARDED_BY(mu_);
  int pending_ ABSL_GUARDED_BY(mu_) = 0;
  bool admitting_ ABSL_GUARDED_BY(mu_) = true;
  bool exiting_ ABSL_GUARDED_BY(mu_) = false;
};

}  // namespace riskbound::rpc

#endif  // RISKBOUND_SERVICE_RPC_CALL_POOL_H_
